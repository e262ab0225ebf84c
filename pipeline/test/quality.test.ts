import { describe, expect, it } from 'vitest';
import { assessQuality } from '../quality.js';
import type { SolveOutput } from '../types.js';

// Checks against the flag definitions in pipeline/quality.ts; the noise convention
// E‖e‖² = m σ² is the solvers' (solvers/noise.ts).
function output(over: Partial<SolveOutput['evidence']> = {}, extra: Partial<SolveOutput> = {}): SolveOutput {
  return {
    evidence: {
      relative_residual: 0.001, residual: 0.01, iterations: 20, certificate_kind: 'duality_gap', certificate: 1e-7,
      converged: true, support_size: 10, added: 0, removed: 0, recoverability: 'safe', solve_ms: 2, ...over,
    },
    coldStart: false,
    hitIterationCap: false,
    indices: new Uint32Array(0),
    values: new Float64Array(0),
    y: new Float64Array(0),
    ...extra,
  };
}
const ctx = { rows: 100, sigma: undefined, gap: 0, droppedBefore: 0 };

describe('assessQuality', () => {
  it('a clean warm frame has no flags', () => {
    expect(assessQuality(output(), ctx)).toEqual([]);
  });

  it('judges the residual against the noise norm σ√m when σ is known', () => {
    // σ = 0.1, m = 100: noise norm ≈ 1, flagged above 2.
    expect(assessQuality(output({ residual: 1.9, relative_residual: 0.5 }), { ...ctx, sigma: 0.1 })).toEqual([]);
    expect(assessQuality(output({ residual: 2.1, relative_residual: 0.5 }), { ...ctx, sigma: 0.1 })).toEqual(['residual_high']);
  });

  it('judges the relative residual against 10% without a noise level', () => {
    expect(assessQuality(output({ relative_residual: 0.09 }), ctx)).toEqual([]);
    expect(assessQuality(output({ relative_residual: 0.11 }), ctx)).toEqual(['residual_high']);
  });

  it('names every stream-context and solver condition', () => {
    const flags = assessQuality(
      output({ converged: false, added: 5, removed: 3, recoverability: 'unlikely' }, { coldStart: false, hitIterationCap: true }),
      { ...ctx, gap: 2, droppedBefore: 1 },
    );
    expect(flags).toEqual(['sequence_gap', 'frames_dropped_before', 'not_converged', 'iteration_cap', 'support_churn', 'recovery_unlikely']);
  });

  it('does not call a cold start churn (there was no previous support)', () => {
    expect(assessQuality(output({ added: 10 }), { ...ctx }).includes('support_churn')).toBe(true);
    expect(assessQuality(output({ added: 10 }, { coldStart: true }), ctx)).toEqual(['cold_start']);
    expect(assessQuality(output({ recoverability: 'marginal' }), ctx)).toEqual(['recovery_marginal']);
  });

  it('flags a non-finite residual', () => {
    expect(assessQuality(output({ residual: Number.NaN, relative_residual: Number.NaN }), ctx)).toEqual(['residual_high']);
  });
});
