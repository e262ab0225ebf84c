import { describe, expect, it } from 'vitest';
import type { AlertMessage, ResultMessage, StreamDeclaration } from '../../../protocol/messages.js';
import { BEHIND_HOLD_MS, DashboardStore, healthOf, LATE_ARRIVAL_MS, missedTotal, TREND_CAPACITY } from '../src/store.js';

const declaration: StreamDeclaration = {
  name: 'stand-3.vib',
  operator: { kind: 'sampling', n: 64, samples: { law: 'explicit', indices: [1, 5, 9] }, basis: { kind: 'dft' } },
  solver: { method: 'fista' },
  alerts: [{ metric: 'relative_residual', above: 0.2, clear_below: 0.1, k: 2, of: 3 }],
};

function result(seq: number, solvedAt: number, flags: string[] = [], residual = 0.01): ResultMessage {
  return {
    v: 1,
    type: 'result',
    stream: declaration.name,
    seq,
    time: solvedAt - 5,
    solved_at: solvedAt,
    flags,
    evidence: {
      relative_residual: residual,
      residual: residual * 3,
      iterations: 7,
      certificate_kind: 'duality_gap',
      certificate: 1e-5,
      converged: true,
      support_size: 3,
      added: 0,
      removed: 0,
      recoverability: 'safe',
      solve_ms: 1,
    },
  };
}

function alert(seq: number, state: 'raised' | 'cleared'): AlertMessage {
  return { v: 1, type: 'alert', stream: declaration.name, seq, rule: 0, metric: 'relative_residual', state, value: 0.3, limit: 0.2 };
}

function subscribedStore(): DashboardStore {
  const store = new DashboardStore();
  store.apply({ v: 1, type: 'subscribed', ref: 'r', id: 's', streams: [declaration] }, 0);
  return store;
}

describe('DashboardStore', () => {
  it('follows results: latest, count, trend samples', () => {
    const store = subscribedStore();
    const stream = store.streams.get(declaration.name)!;
    for (let seq = 0; seq < 10; seq++) store.apply(result(seq, 1000 + 100 * seq), 1001 + 100 * seq);
    expect(stream.results).toBe(10);
    expect(stream.latest?.seq).toBe(9);
    expect(stream.trends.size).toBe(10);
    const times = new Float64Array(TREND_CAPACITY);
    const columns = [0, 1, 2].map(() => new Float64Array(TREND_CAPACITY));
    expect(stream.trends.copyWindow(0, times, columns)).toBe(10);
    expect(times[0]).toBe(995); // the frame's acquisition time
    expect(columns[1]![0]).toBe(7); // iterations
    expect(healthOf(stream, 2000)).toBe('steady');
    expect(store.behind(2000)).toBe(false);
  });

  it('counts passed-over results as behind, but not gaps the pipeline flagged upstream', () => {
    const store = subscribedStore();
    const stream = store.streams.get(declaration.name)!;
    store.apply(result(0, 1000), 1001);
    store.apply(result(3, 1100, ['sequence_gap']), 1101);
    expect(missedTotal(stream)).toBe(2);
    expect(store.behind(1102)).toBe(false);
    store.apply(result(6, 1200), 1201); // 4 and 5 never came, nobody said why
    expect(missedTotal(stream)).toBe(4);
    expect(store.behind(1202)).toBe(true);
    expect(healthOf(stream, 1202)).toBe('uneasy');
    expect(store.behind(1201 + BEHIND_HOLD_MS)).toBe(false);
  });

  it('takes missed notices into account once, and a late arrival as a sign of being behind', () => {
    const store = subscribedStore();
    const stream = store.streams.get(declaration.name)!;
    store.apply(result(0, 1000), 1010);
    store.apply({ v: 1, type: 'missed', stream: declaration.name, from_seq: 1, to_seq: 4, count: 4, reason: 'subscriber_behind' }, 1020);
    store.apply(result(5, 1100), 1110);
    expect(missedTotal(stream)).toBe(4);
    expect(store.behind(1111)).toBe(true);
    const later = 1110 + BEHIND_HOLD_MS + 1;
    expect(store.behind(later)).toBe(false);
    // Solved at 2000 but seen LATE_ARRIVAL_MS + 10 later than the quickest delivery (10 ms).
    store.apply(result(6, 2000), 2010 + LATE_ARRIVAL_MS + 10);
    expect(store.behind(2010 + LATE_ARRIVAL_MS + 11)).toBe(true);
  });

  it('keeps alerts open until cleared, and lists them newest first with their frame', () => {
    const store = subscribedStore();
    const stream = store.streams.get(declaration.name)!;
    store.apply(result(11, 1000, ['residual_high'], 0.5), 1001);
    store.apply(alert(11, 'raised'), 1002);
    expect(stream.openAlerts.size).toBe(1);
    expect(healthOf(stream, 1003)).toBe('alerting');
    store.apply(result(15, 1400), 1401);
    store.apply(alert(15, 'cleared'), 1402);
    expect(stream.openAlerts.size).toBe(0);
    expect(store.ledger.map((e) => [e.alert.state, e.alert.seq, e.frameTime])).toEqual([
      ['cleared', 15, 1395],
      ['raised', 11, 995],
    ]);
  });

  it('marks closed streams quiet and takes a new declaration of them', () => {
    const store = subscribedStore();
    store.apply(result(0, 1000), 1001);
    store.apply({ v: 1, type: 'stream_event', stream: declaration.name, event: 'closed' }, 1100);
    const stream = store.streams.get(declaration.name)!;
    expect(healthOf(stream, 1101)).toBe('quiet');
    store.apply({ v: 1, type: 'stream_event', stream: declaration.name, event: 'declared', declaration }, 1200);
    expect(stream.open).toBe(true);
    store.apply({ v: 1, type: 'stream_event', stream: 'other', event: 'declared', declaration: { ...declaration, name: 'other' } }, 1300);
    expect([...store.streams.keys()]).toEqual([declaration.name, 'other']);
  });
});

describe('the daemon view of streams', () => {
  it('reads drops, queue depth and producer presence, skipping entries it cannot read', async () => {
    const { parseStreamsBody } = await import('../src/daemon-view.js');
    const view = parseStreamsBody({
      streams: [
        { name: 'a', producer_connected: true, queue_depth: 4, frames: { received: 10, refused: 1, dropped: 2, solved: 7 } },
        { name: 'b' },
        { nameless: true },
        null,
      ],
    });
    expect([...view.entries()]).toEqual([
      ['a', { drops: 3, queueDepth: 4, producerConnected: true }],
      ['b', { drops: 0, queueDepth: 0, producerConnected: false }],
    ]);
    expect(parseStreamsBody({ error: 'unauthorized' }).size).toBe(0);
    expect(parseStreamsBody(null).size).toBe(0);
  });
});
