import { pack } from 'msgpackr';
import { describe, expect, it } from 'vitest';
import type { PublishedResult } from '../../pipeline/types.js';
import { decodeOutEvent, encodeOutEvent } from '../outEvents.js';

describe('out events between nodes', () => {
  const result: PublishedResult = {
    stream: 'line.1',
    seq: 41,
    time: 1_700_000_000_000.5,
    solvedAt: 1_700_000_000_010,
    flags: ['cold_start'],
    evidence: {
      relative_residual: 1e-9, residual: 2e-9, iterations: 17, certificate_kind: 'duality_gap', certificate: 1e-10,
      converged: true, support_size: 2, added: 2, removed: 0, recoverability: 'safe', solve_ms: 0.8,
    },
    indices: new Uint32Array([3, 900]),
    values: new Float64Array([1.5, -2, Number.MIN_VALUE, 1e300]),
    signal: new Float64Array([0.25, -0.125]),
    y: new Float64Array([1, 2, 3, 4]),
    sigma: 0.01,
    latencySeconds: 0.004,
  };

  it('carries a result bit for bit (numbers as little-endian bin, like the wire protocol)', () => {
    const back = decodeOutEvent(encodeOutEvent({ kind: 'result', result }));
    expect(back).toEqual({ kind: 'result', result });
  });

  it('carries alerts, drop notices and refusals', () => {
    const missed = { stream: 's', fromSeq: 3, toSeq: 5, count: 3, reason: 'dropped_by_queue' as const };
    expect(decodeOutEvent(encodeOutEvent({ kind: 'missed', missed }))).toEqual({ kind: 'missed', missed: { kind: 'missed', ...missed } });
    const refused = { kind: 'refused' as const, stream: 's', seq: 9, reason: 'out_of_order', detail: 'late' };
    expect(decodeOutEvent(encodeOutEvent(refused))).toEqual(refused);
  });

  it('names what is wrong with a message that is not an out event', () => {
    expect(() => decodeOutEvent(pack([1, 2]))).toThrow('out event: not a map');
    expect(() => decodeOutEvent(pack({ kind: 'result', stream: 's', seq: 'x' }))).toThrow('out event: seq must be a number');
    expect(() => decodeOutEvent(pack({ kind: 'gossip' }))).toThrow('out event: unknown kind "gossip"');
  });
});
