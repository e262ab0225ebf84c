import { describe, expect, it } from 'vitest';
import { float64ToBin, uint32ToBin, type ResultMessage } from '../../protocol/index.js';
import { checkSummary, compareResult, compareSession, passed } from '../replayCheck.js';

const evidence = {
  relative_residual: 0.01, residual: 0.1, iterations: 5, certificate_kind: 'residual', certificate: 0,
  converged: true, support_size: 2, added: 0, removed: 0, recoverability: 'safe', solve_ms: 1,
};

function result(seq: number, indices: number[], values: number[], extra: Partial<ResultMessage> = {}): ResultMessage {
  return {
    v: 1, type: 'result', stream: 's', seq, time: 0, solved_at: 0, flags: [], evidence,
    coefficients: { indices: uint32ToBin(Uint32Array.from(indices)), values: float64ToBin(Float64Array.from(values)) },
    ...extra,
  };
}

describe('replay check', () => {
  it('agrees bit for bit at tolerance 0 and within tolerance otherwise', () => {
    const a = result(0, [1, 4], [2, 0, 0, -1]);
    expect(compareResult(a, result(0, [1, 4], [2, 0, 0, -1]), 0)).toBeNull();
    // |Δ| ≈ 1e-12 at index 4 (as rounded in float64) against a largest recorded magnitude of 2.
    const near = result(0, [1, 4], [2, 0, 0, -1 + 1e-12]);
    expect(compareResult(a, near, 0)!.coefficientError).toBe(Math.abs(-1 + 1e-12 + 1) / 2);
    expect(compareResult(a, near, 1e-12)).toBeNull();
  });

  it('counts support changes over the union of supports', () => {
    const d = compareResult(result(3, [1, 4], [2, 0, 0, -1]), result(3, [1, 7], [2, 0, 0.5, 0]), 1e-9)!;
    expect([d.supportAdded, d.supportRemoved, d.worstIndex]).toEqual([1, 1, 4]);
    expect(d.coefficientError).toBeCloseTo(0.5, 12); // |−1 − 0| / 2 at index 4
  });

  it('flags and iteration counts must match exactly', () => {
    const a = result(0, [1], [1, 0]);
    expect(compareResult(a, result(0, [1], [1, 0], { flags: ['residual_high'] }), 1)!.flags).toEqual({ recorded: [], replayed: ['residual_high'] });
    expect(compareResult(a, result(0, [1], [1, 0], { evidence: { ...evidence, iterations: 9 } }), 1)!.iterations).toEqual({ recorded: 5, replayed: 9 });
  });

  it('a missing replayed result fails the check and is named in the summary', () => {
    const recorded = new Map([['s#0', result(0, [1], [1, 0])], ['s#1', result(1, [1], [1, 0])]]);
    const replayed = new Map([['r.s#0', result(0, [1], [1, 0], { stream: 'r.s' })]]);
    const report = compareSession(recorded, replayed, [{ stream: 's', seq: 0 }, { stream: 's', seq: 1 }], (n) => `r.${n}`, 0);
    expect(passed(report)).toBe(false);
    expect([report.compared, report.agreeing, report.missing]).toEqual([1, 1, [{ stream: 's', seq: 1 }]]);
    expect(checkSummary(report)).toMatch(/1 results compared, 1 agree, 0 differ, 1 missing[\s\S]*missing results: s #1[\s\S]*check FAILED/);
  });
});
