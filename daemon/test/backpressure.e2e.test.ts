import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { MissedMessage, ResultMessage } from '../../protocol/index.js';
import type { RunningDaemon } from '../index.js';
import { TestClient, declare, eventually, frameMessage, metricValue, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// A subscriber that stops reading must not delay the solvers or another subscriber, and the
// daemon must hold a bounded amount for it (its outbox: at most the high watermark plus one
// message in flight, plus one result per stream under keep_latest). The accounting rule under
// test: every result the slow subscriber does not get is announced in a `missed` notice.

const FRAMES = 200;
const HIGH = 256 * 1024;
const LOW = 64 * 1024;

describe('a subscriber that stops reading', () => {
  let daemon: RunningDaemon;
  const s = dftStream(4096, 256, [5, 100, 333, 1600, 3901]);

  beforeAll(async () => {
    daemon = await startTestDaemon({
      workers: 1,
      limits: { outboxHighBytes: HIGH, outboxLowBytes: LOW, outboxHardCapBytes: 64 * 1024 * 1024 } as never,
    });
  });
  afterAll(() => daemon.close());

  it('does not hold back the others, stays bounded, and learns what it missed', async () => {
    const subscribe = async (policy: 'drop_with_notice' | 'keep_latest', want: ('signal' | 'coefficients' | 'quality')[]) => {
      const c = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
      c.send({ v: 1, type: 'subscribe', ref: 'r', streams: 'lag.*', want, when_behind: policy });
      await c.next((m) => m.type === 'subscribed');
      return c;
    };
    const dropper = await subscribe('drop_with_notice', ['signal', 'coefficients']);
    const keeper = await subscribe('keep_latest', ['signal', 'coefficients']);
    const fast = await subscribe('drop_with_notice', ['quality']);
    dropper.ws.pause(); // stop reading: the kernel buffers fill, then the daemon's outbox
    keeper.ws.pause();

    const producer = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    await declare(producer, { name: 'lag.dft', operator: s.operator, solver: { method: 'lasso' }, queue: { capacity: FRAMES, policy: 'refuse_new' } });
    const y = s.measurements(0);
    for (let t = 0; t < FRAMES; t++) producer.send(frameMessage('lag.dft', t, y));

    // The fast subscriber gets every result while the slow ones read nothing.
    await fast.next((m) => m.type === 'result' && m.seq === FRAMES - 1, 120_000, 'the last result at the fast subscriber');
    expect(fast.ofType('result').map((r) => r.seq)).toEqual(Array.from({ length: FRAMES }, (_, t) => t));
    expect(fast.ofType('missed')).toEqual([]);
    expect(dropper.received.filter((m) => m.type === 'result')).toEqual([]);

    // Both slow subscribers are behind, and what the daemon holds for them is bounded.
    const resultBytes = 64 * 1024 + 5 * 20 + 512; // signal + coefficients + envelope
    const outboxes = daemon.subscriberOutboxes();
    const behind = outboxes.filter((o) => o.behind);
    expect(behind).toHaveLength(2);
    for (const o of behind) {
      expect(o.pendingBytes).toBeLessThanOrEqual(HIGH + resultBytes);
      expect(o.heldResults).toBeLessThanOrEqual(1); // one stream: at most one held result (keep_latest)
      expect(o.heldNotices).toBe(0);
    }

    // Let them read again: each learns exactly which results it missed.
    dropper.ws.resume();
    keeper.ws.resume();
    for (const c of [dropper, keeper]) {
      await eventually(() => coveredSeqs(c).size === FRAMES, 'every seq is either delivered or announced as missed');
      const results = c.ofType('result') as ResultMessage[];
      const seqs = results.map((r) => r.seq);
      expect(seqs).toEqual([...seqs].sort((a, b) => a - b)); // in order, no repeats
      const missed = c.ofType('missed') as MissedMessage[];
      expect(missed.length).toBeGreaterThan(0);
      expect(missed.every((m) => m.reason === 'subscriber_behind')).toBe(true);
      expect(results.length + missed.reduce((n, m) => n + m.count, 0)).toBe(FRAMES);
    }
    // keep_latest delivered the newest result last.
    expect(keeper.ofType('result').at(-1)?.seq).toBe(FRAMES - 1);

    // Metrics count what the slow subscribers missed.
    const text = daemon.metricsText();
    const missedTotal = [dropper, keeper].reduce((n, c) => n + c.ofType('missed').reduce((k, m) => k + m.count, 0), 0);
    expect(metricValue(text, 'sparsewire_results_missed_total')).toBe(missedTotal);
    expect(metricValue(text, 'sparsewire_frames_solved_total')).toBe(FRAMES);
    for (const c of [dropper, keeper, fast, producer]) c.close();
  });
});

/** Seqs a subscriber either received or was told it missed. */
function coveredSeqs(c: TestClient): Set<number> {
  const seen = new Set<number>();
  for (const r of c.ofType('result')) seen.add(r.seq);
  for (const m of c.ofType('missed')) {
    // A range's count may be below its span only when seqs had gaps; this stream has none.
    for (let s = m.from_seq; s <= m.to_seq; s++) seen.add(s);
  }
  return seen;
}

// A producer that ignores its credits on a stream with a huge queue: the daemon bounds the bytes
// all queues hold by pausing its reads (TCP backpressure), and loses nothing.
describe('a producer flooding large queues', () => {
  it('is paused at the socket, then resumed, with every frame solved', async () => {
    const daemon = await startTestDaemon({ workers: 1, limits: { maxQueuedBytes: 64 * 1024 } as never });
    try {
      const s = dftStream();
      const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
      await declare(p, { name: 'flood', operator: s.operator, solver: { method: 'lasso' }, queue: { capacity: 5000, policy: 'refuse_new' } });
      const y = s.measurements(0); // 1 KiB of measurements per frame
      const FRAMES = 600;
      for (let t = 0; t < FRAMES; t++) p.send(frameMessage('flood', t, y));
      await p.next((m) => m.type === 'ack' && m.through_seq === FRAMES - 1, 120_000, 'the last ack');
      const text = daemon.metricsText();
      expect(metricValue(text, 'sparsewire_ingest_pauses_total')).toBeGreaterThanOrEqual(1);
      expect(metricValue(text, 'sparsewire_frames_solved_total')).toBe(FRAMES);
      expect(metricValue(text, 'sparsewire_frames_refused_total')).toBe(0);
      expect(metricValue(text, 'sparsewire_frames_dropped_total')).toBe(0);
      expect(metricValue(text, 'sparsewire_queued_bytes')).toBe(0);
      p.close();
    } finally {
      await daemon.close();
    }
  });
});
