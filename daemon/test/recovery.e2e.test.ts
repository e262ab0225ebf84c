import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ResultMessage } from '../../protocol/index.js';
import type { RunningDaemon } from '../index.js';
import { TestClient, declare, decodedCoefficients, decodedSignal, frameMessage, relativeError, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream, gaborStream, gaussianHaarStream, type SyntheticStream } from './synthetic.js';

// End to end: three streams of different operators through one daemon at once. Each frame's
// truth is known by construction (y = A c computed with the operator itself); exact recovery of
// these sparsity levels from this many measurements is inside the l1 phase transition
// (Donoho & Tanner, "Counting faces of randomly projected polytopes when the projection radically
// lowers dimension", J. AMS 22(1), 2009), so each result must match its truth.

const FRAMES = 12;

describe('three streams at once', () => {
  let daemon: RunningDaemon;
  const streams: Array<[string, SyntheticStream, object]> = [
    ['vib.dft', dftStream(), { method: 'lasso' }],
    ['radar.gabor', gaborStream(), { method: 'lasso' }],
    ['telemetry.haar', gaussianHaarStream(), { method: 'basis_pursuit' }],
  ];

  beforeAll(async () => {
    daemon = await startTestDaemon({ workers: 2 });
  });
  afterAll(() => daemon.close());

  it('each recovers its synthetic truth, in order, while running in parallel', async () => {
    const watcher = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
    watcher.send({ v: 1, type: 'subscribe', ref: 's1', streams: ['vib.*', 'radar.*', 'telemetry.*'], want: ['coefficients', 'signal'], when_behind: 'drop_with_notice' });
    await watcher.next((m) => m.type === 'subscribed');

    const producer = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    for (const [name, s, solver] of streams) {
      const declared = await declare(producer, { name, operator: s.operator, solver });
      expect(declared.next_seq).toBeNull();
      expect(declared.credits).toBe(32); // the protocol's default queue capacity
    }
    // Interleave the streams' frames so they are in flight together.
    for (let t = 0; t < FRAMES; t++) {
      for (const [name, s] of streams) producer.send(frameMessage(name, t, s.measurements(t)));
    }
    for (const [name] of streams) {
      await watcher.next((m) => m.type === 'result' && m.stream === name && m.seq === FRAMES - 1, 60_000, `last result of ${name}`);
    }

    for (const [name, s] of streams) {
      const results = watcher.ofType('result').filter((r) => r.stream === name) as ResultMessage[];
      expect(results.map((r) => r.seq)).toEqual(Array.from({ length: FRAMES }, (_, t) => t));
      for (const r of results) {
        const { indices } = decodedCoefficients(r);
        expect([...indices]).toEqual(s.support);
        expect(relativeError(decodedSignal(r), s.signal(r.seq))).toBeLessThan(1e-4);
        expect(r.evidence.support_size).toBe(s.support.length);
      }
      expect(results[0]!.flags).toContain('cold_start');
      expect(results.slice(1).every((r) => !r.flags.includes('cold_start'))).toBe(true);
    }

    // Streams were spread over both workers (stream affinity: each stays on one).
    const workers = new Set(daemon.core.pool.assignments().values());
    expect(workers.size).toBe(2);

    // Every frame acknowledged and its credit returned.
    await producer.next((m) => m.type === 'ack' && m.stream === 'telemetry.haar' && m.through_seq === FRAMES - 1);
    for (const [name] of streams) {
      const acks = producer.ofType('ack').filter((a) => a.stream === name);
      expect(acks.reduce((n, a) => n + a.solved, 0)).toBe(FRAMES);
      const credit = producer.ofType('credit').filter((c) => c.stream === name).reduce((n, c) => n + c.grant, 0);
      expect(credit).toBe(FRAMES);
    }
    producer.close();
    watcher.close();
  });
});
