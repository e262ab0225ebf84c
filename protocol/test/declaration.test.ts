import { pack } from 'msgpackr';
import { describe, expect, it } from 'vitest';
import { decode } from '../codec.js';
import { ProtocolError } from '../errors.js';
import { MAX_ALERT_RULES, MAX_ALERT_WINDOW, MAX_QUEUE_CAPACITY } from '../limits.js';

const base = { name: 'line-1.torque', operator: { kind: 'gaussian', rows: 32, cols: 64, seed: 1 }, solver: { method: 'omp' } };
const rule = { metric: 'iterations', above: 200, clear_below: 100, k: 2, of: 4 };

function fieldOf(stream: Record<string, unknown>): string | undefined {
  try {
    decode(pack({ v: 1, type: 'declare', ref: 'r', stream }));
  } catch (err) {
    expect(err).toBeInstanceOf(ProtocolError);
    expect((err as ProtocolError).code).toBe('invalid_field');
    return (err as ProtocolError).field;
  }
  return undefined;
}

describe('declaration envelope', () => {
  it('accepts a full declaration and keeps operator and solver opaque', () => {
    const stream = { ...base, alerts: [rule], queue: { capacity: 4, policy: 'refuse_new' }, noise_sigma: 0, note: '' };
    expect(fieldOf(stream)).toBeUndefined();
    expect(fieldOf({ ...base, operator: { anything: [{ goes: 'here' }] } })).toBeUndefined();
  });

  it('names the offending field', () => {
    const cases: Array<[Record<string, unknown>, string]> = [
      [{ ...base, name: '-leading-dash' }, 'stream.name'],
      [{ ...base, name: 'a/b' }, 'stream.name'],
      [{ ...base, operator: undefined }, 'stream.operator'],
      [{ ...base, operator: 'dft' }, 'stream.operator'],
      [{ ...base, solver: [1] }, 'stream.solver'],
      [{ ...base, queue: { capacity: 0, policy: 'refuse_new' } }, 'stream.queue.capacity'],
      [{ ...base, queue: { capacity: MAX_QUEUE_CAPACITY + 1, policy: 'refuse_new' } }, 'stream.queue.capacity'],
      [{ ...base, queue: { capacity: 4, policy: 'drop_newest' } }, 'stream.queue.policy'],
      [{ ...base, alerts: [rule, { ...rule, metric: 'temperature' }] }, 'stream.alerts[1].metric'],
      [{ ...base, alerts: [{ ...rule, clear_below: 200 }] }, 'stream.alerts[0].clear_below'],
      [{ ...base, alerts: [{ ...rule, k: 5 }] }, 'stream.alerts[0].k'],
      [{ ...base, alerts: [{ ...rule, k: 0 }] }, 'stream.alerts[0].k'],
      [{ ...base, alerts: [{ ...rule, of: MAX_ALERT_WINDOW + 1 }] }, 'stream.alerts[0].of'],
      [{ ...base, alerts: [{ ...rule, lookback: 3 }] }, 'stream.alerts[0].lookback'],
      [{ ...base, alerts: Array(MAX_ALERT_RULES + 1).fill(rule) }, 'stream.alerts'],
      [{ ...base, noise_sigma: -1 }, 'stream.noise_sigma'],
      [{ ...base, note: 'x'.repeat(2000) }, 'stream.note'],
      [{ ...base, colour: 'red' }, 'stream.colour'],
    ];
    for (const [stream, field] of cases) expect(fieldOf(stream), field).toBe(field);
  });
});
