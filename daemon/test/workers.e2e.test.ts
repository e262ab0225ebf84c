import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ResultMessage } from '../../protocol/index.js';
import type { RunningDaemon } from '../index.js';
import { TestClient, declare, decodedSignal, eventually, frameMessage, metricValue, relativeError, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream, gaussianHaarStream } from './synthetic.js';

// A solver worker that dies is replaced; the streams it held are re-homed and their next frame
// is solved cold (flag `cold_start`) and still correctly; streams on other workers do not notice.

describe('worker replacement', () => {
  let daemon: RunningDaemon;
  beforeAll(async () => {
    daemon = await startTestDaemon({ workers: 2 });
  });
  afterAll(() => daemon.close());

  it('re-homes the dead worker’s streams with a cold start', async () => {
    const a = dftStream();
    const b = gaussianHaarStream();
    const w = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
    w.send({ v: 1, type: 'subscribe', ref: 's', streams: '*', want: ['signal'], when_behind: 'drop_with_notice' });
    await w.next((m) => m.type === 'subscribed');
    const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    await declare(p, { name: 'a', operator: a.operator, solver: { method: 'lasso' } });
    await declare(p, { name: 'b', operator: b.operator, solver: { method: 'basis_pursuit' } });
    const send = (t: number) => {
      p.send(frameMessage('a', t, a.measurements(t)));
      p.send(frameMessage('b', t, b.measurements(t)));
    };
    for (let t = 0; t < 3; t++) send(t);
    await w.next((m) => m.type === 'result' && m.stream === 'a' && m.seq === 2);
    await w.next((m) => m.type === 'result' && m.stream === 'b' && m.seq === 2);

    const homes = daemon.core.pool.assignments();
    expect(homes.get('a')).not.toBe(homes.get('b'));
    await daemon.core.pool.terminateWorker(homes.get('a')!);
    await eventually(() => metricValue(daemon.metricsText(), 'sparsewire_workers_replaced_total') === 1, 'the worker is replaced');

    for (let t = 3; t < 6; t++) send(t);
    await w.next((m) => m.type === 'result' && m.stream === 'a' && m.seq === 5);
    await w.next((m) => m.type === 'result' && m.stream === 'b' && m.seq === 5);
    const flagsOf = (name: string, seq: number) => (w.ofType('result') as ResultMessage[]).find((r) => r.stream === name && r.seq === seq)!.flags;
    expect(flagsOf('a', 3)).toContain('cold_start');
    expect(flagsOf('a', 4)).not.toContain('cold_start');
    expect(flagsOf('b', 3)).not.toContain('cold_start');
    for (const r of w.ofType('result') as ResultMessage[]) {
      const truth = r.stream === 'a' ? a.signal(r.seq) : b.signal(r.seq);
      expect(relativeError(decodedSignal(r), truth)).toBeLessThan(1e-4);
    }
    expect(daemon.core.pool.size).toBe(2);
    p.close();
    w.close();
  });
});
