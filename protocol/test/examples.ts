import { float64ToBin, uint32ToBin } from '../bin.js';
import type { Message, MessageType } from '../messages.js';

/** Invented example messages, one or more per type, used by the conformance tests. */
const y = float64ToBin(new Float64Array([0.5, -1.25, 3, 0, -0, 1e-300]));
const sparse = { indices: uint32ToBin(new Uint32Array([3, 17])), values: float64ToBin(new Float64Array([1, -2, 0.25, 4])) };
const declaration = {
  name: 'stand-3.gearbox_vib',
  operator: { kind: 'sampling', n: 512, samples: { law: 'uniform', m: 96, seed: 7 }, basis: { kind: 'dft' } },
  solver: { method: 'fista', lambda: 0.01, nested: { list: [1, 2.5, 'x', null, true] } },
  alerts: [{ metric: 'relative_residual' as const, above: 0.3, clear_below: 0.1, k: 3, of: 5 }],
  queue: { capacity: 16, policy: 'keep_latest' as const },
  noise_sigma: 0.01,
  note: 'test stand 3, accelerometer A',
};
const evidence = {
  relative_residual: 0.012,
  residual: 0.3,
  iterations: 41,
  certificate_kind: 'duality_gap',
  certificate: Infinity,
  converged: true,
  support_size: 2,
  added: 1,
  removed: 0,
  recoverability: 'safe',
  solve_ms: 1.75,
};

export const EXAMPLES: Record<MessageType, Message[]> = {
  declare: [
    { v: 1, type: 'declare', ref: 'd1', stream: declaration },
    { v: 1, type: 'declare', ref: 'd2', stream: { name: 'x', operator: {}, solver: {} } },
  ],
  frame: [
    { v: 1, type: 'frame', stream: 'x', seq: 0, time: 1_700_000_000_123.5, y },
    { v: 1, type: 'frame', stream: 'x', seq: Number.MAX_SAFE_INTEGER, time: 0, y, sigma: 0.02 },
  ],
  close: [{ v: 1, type: 'close', ref: 'c1', stream: 'x' }],
  declared: [
    { v: 1, type: 'declared', ref: 'd1', stream: 'x', credits: 8, next_seq: 120 },
    { v: 1, type: 'declared', ref: 'd2', stream: 'x', credits: 0, next_seq: null },
  ],
  credit: [{ v: 1, type: 'credit', stream: 'x', grant: 4 }],
  ack: [{ v: 1, type: 'ack', stream: 'x', through_seq: 99, solved: 7, dropped: 1 }],
  refused: [{ v: 1, type: 'refused', stream: 'x', seq: 5, reason: 'queue_full', detail: 'queue of 16 frames is full' }],
  closed: [{ v: 1, type: 'closed', ref: 'c1', stream: 'x' }],
  error: [
    { v: 1, type: 'error', code: 'malformed', detail: 'not MessagePack' },
    { v: 1, type: 'error', ref: 'd1', stream: 'x', code: 'invalid_field', detail: 'n must be a power of two', field: 'stream.operator.n' },
  ],
  subscribe: [
    { v: 1, type: 'subscribe', ref: 's1', streams: 'stand-*', want: ['top_k', 'quality'], top_k: 5, when_behind: 'keep_latest' },
    {
      v: 1,
      type: 'subscribe',
      ref: 's2',
      streams: ['x', 'y.*'],
      want: ['coefficients', 'signal', 'measurements', 'alerts'],
      when_behind: 'drop_with_notice',
      resume_after: { x: 41 },
    },
  ],
  unsubscribe: [{ v: 1, type: 'unsubscribe', ref: 'u1', id: 'sub-1' }],
  subscribed: [{ v: 1, type: 'subscribed', ref: 's1', id: 'sub-1', streams: [declaration] }],
  unsubscribed: [{ v: 1, type: 'unsubscribed', ref: 'u1', id: 'sub-1' }],
  result: [
    { v: 1, type: 'result', stream: 'x', seq: 3, time: 1000.5, solved_at: 1002.25, flags: [], evidence },
    {
      v: 1,
      type: 'result',
      stream: 'x',
      seq: 4,
      time: 1001,
      solved_at: 1003,
      flags: ['residual_high', 'sequence_gap'],
      evidence: { ...evidence, certificate: Number.NaN, converged: false },
      coefficients: sparse,
      top_k: sparse,
      signal: y.subarray(0, 32),
      y,
      sigma: 0.5,
    },
  ],
  alert: [{ v: 1, type: 'alert', stream: 'x', seq: 9, rule: 0, metric: 'relative_residual', state: 'raised', value: 0.5, limit: 0.3 }],
  missed: [{ v: 1, type: 'missed', stream: 'x', from_seq: 10, to_seq: 14, count: 5, reason: 'subscriber_behind' }],
  stream_event: [
    { v: 1, type: 'stream_event', stream: 'x', event: 'declared', declaration },
    { v: 1, type: 'stream_event', stream: 'x', event: 'closed' },
  ],
};
