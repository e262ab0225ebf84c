import { pack } from 'msgpackr';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { AckMessage, CreditMessage, MissedMessage, RefusedMessage } from '../../protocol/index.js';
import type { RunningDaemon } from '../index.js';
import { TestClient, declare, eventually, frameMessage, metricValue, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// No frame vanishes without a count (DESIGN §5): a producer that ignores its credits floods three
// streams with the three queue policies, mixed with duplicates, late frames, NaN and ragged
// frames. Afterwards every frame is accounted for exactly once — solved (a result), refused (a
// `refused` to the producer) or dropped (a `missed` range to subscribers and `dropped` in an
// ack) — and the metrics agree with what the clients were told.

describe('accounting', () => {
  let daemon: RunningDaemon;
  const s = dftStream();
  beforeAll(async () => {
    daemon = await startTestDaemon({ workers: 2 });
  });
  afterAll(() => daemon.close());

  it('every frame is solved, refused or dropped, and each is counted and announced', async () => {
    const w = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
    w.send({ v: 1, type: 'subscribe', ref: 's', streams: 'flood.*', want: ['quality'], when_behind: 'drop_with_notice' });
    await w.next((m) => m.type === 'subscribed');
    const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    const policies = ['refuse_new', 'drop_oldest', 'keep_latest'] as const;
    for (const policy of policies) {
      await declare(p, { name: `flood.${policy}`, operator: s.operator, solver: { method: 'lasso' }, queue: { capacity: 3, policy } });
    }
    const y = s.measurements(0);
    const nan = y.slice();
    nan[0] = Number.NaN;
    let sent = 0;
    for (let t = 0; t < 60; t++) {
      for (const policy of policies) {
        const name = `flood.${policy}`;
        sent++;
        if (t % 13 === 5) p.send(frameMessage(name, t, nan)); // refused: not_finite
        else if (t % 17 === 7) p.sendRaw(pack({ v: 1, type: 'frame', stream: name, seq: t, time: 0, y: new Uint8Array(24) })); // refused: wrong_length
        else p.send(frameMessage(name, t, y));
        if (t % 11 === 3) {
          sent++;
          p.send(frameMessage(name, t - 1, y)); // refused: duplicate (or out_of_order if t-1 was refused)
        }
      }
    }
    sent++;
    p.send(frameMessage('flood.unknown', 0, y)); // refused: unknown_stream

    const text = () => daemon.metricsText();
    await eventually(() => metricValue(text(), 'sparsewire_frames_received_total') === sent, 'the daemon received every frame');
    await daemon.core.pipeline.whenIdle();
    const received = metricValue(text(), 'sparsewire_frames_received_total');
    const solved = metricValue(text(), 'sparsewire_frames_solved_total');
    const refused = metricValue(text(), 'sparsewire_frames_refused_total');
    const dropped = metricValue(text(), 'sparsewire_frames_dropped_total');
    expect(solved + refused + dropped).toBe(received);
    expect(dropped).toBeGreaterThan(0);
    expect(metricValue(text(), 'sparsewire_frames_refused_total', { reason: 'queue_full' })).toBeGreaterThan(0);

    // The producer was told about every refusal, and its acks count every solved and dropped frame.
    await eventually(() => p.ofType('refused').length === refused, 'all refusals arrived');
    await eventually(() => sum(p.ofType('ack') as AckMessage[], (a) => a.solved + a.dropped) === solved + dropped, 'all acks arrived');
    expect(sum(p.ofType('ack') as AckMessage[], (a) => a.dropped)).toBe(dropped);
    const reasons = new Set((p.ofType('refused') as RefusedMessage[]).map((r) => r.reason));
    for (const r of reasons) expect(['duplicate', 'out_of_order', 'not_finite', 'wrong_length', 'queue_full', 'unknown_stream']).toContain(r);
    for (const r of ['duplicate', 'not_finite', 'wrong_length', 'queue_full', 'unknown_stream']) expect(reasons).toContain(r);

    // Every frame sent on a declared stream returned its credit.
    await eventually(() => sum(p.ofType('credit') as CreditMessage[], (c) => c.grant) === sent - 1, 'every credit returned');

    // Subscribers saw each accepted frame exactly once: as a result or inside a missed range.
    await eventually(() => w.ofType('result').length === solved, 'all results arrived');
    await eventually(() => sum(w.ofType('missed') as MissedMessage[], (m) => m.count) === dropped, 'all drop notices arrived');
    for (const policy of policies) {
      const name = `flood.${policy}`;
      const results = w.ofType('result').filter((r) => r.stream === name).map((r) => r.seq);
      expect(results).toEqual([...results].sort((a, b) => a - b));
      const missed = (w.ofType('missed') as MissedMessage[]).filter((m) => m.stream === name);
      expect(missed.every((m) => m.reason === 'dropped_by_queue')).toBe(true);
      for (const seq of results) expect(missed.some((m) => seq >= m.from_seq && seq <= m.to_seq)).toBe(false);
      const st = daemon.streams().find((x) => (x as { name: string }).name === name) as { frames: { received: number; refused: number; dropped: number; solved: number } };
      expect(st.frames.received).toBe(st.frames.refused + st.frames.dropped + st.frames.solved);
      expect(results.length).toBe(st.frames.solved);
      expect(sum(missed, (m) => m.count)).toBe(st.frames.dropped);
    }
    p.close();
    w.close();
  });
});

function sum<T>(items: T[], f: (t: T) => number): number {
  return items.reduce((n, x) => n + f(x), 0);
}
