import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Producer, Subscriber, type ProducerStream, type Result } from '../../clients/index.js';
import { eventually, metricValue } from '../../daemon/test/helpers.js';
import { dftStream } from '../../daemon/test/synthetic.js';
import type { AckMessage, MissedMessage } from '../../protocol/index.js';
import { DaemonProcess } from './support/daemonProcess.js';
import { byScale, recordFigures } from './support/scale.js';

// Solver workers that throw (an uncaught exception inside the worker's own event loop, injected
// through the inspector) or die (terminated) while frames are queued and in flight. Contract
// (docs/daemon.md, "Workers"; daemon/workerPool.ts): the worker is replaced, its streams are
// re-homed and their next result is flagged `cold_start`, a frame it was solving is solved again,
// and nothing the daemon accepted is lost — every frame is acknowledged as solved and every
// result reaches the subscriber. The daemon process stays up throughout.

const STREAMS = 4;
const FAULTS = byScale({ ci: 4, report: 20, soak: 120 });
const FRAMES_PER_ROUND = 8;

describe('solver worker faults', () => {
  let daemon: DaemonProcess;
  beforeAll(async () => {
    daemon = await DaemonProcess.fixture({ workers: 2, logLevel: 'warn' });
  });
  afterAll(async () => {
    await daemon?.stop();
  });

  it('a worker that throws or dies is replaced, its streams re-homed and flagged, no accepted frame lost', async () => {
    const feed = dftStream(256, 64);
    const names = Array.from({ length: STREAMS }, (_, i) => `fault.s${i}`);
    const subscriber = new Subscriber({ url: daemon.url });
    const results = new Map<string, Result[]>(names.map((n) => [n, []]));
    const missed: MissedMessage[] = [];
    subscriber.on('result', (r) => results.get(r.stream)?.push(r));
    subscriber.on('missed', (m) => missed.push(m));
    await subscriber.connect();
    await subscriber.subscribe({ streams: 'fault.*', want: ['quality'], whenBehind: 'drop_with_notice' });

    const producer = new Producer({ url: daemon.url });
    const acks = { solved: 0, dropped: 0 };
    producer.on('ack', (a: AckMessage) => {
      acks.solved += a.solved;
      acks.dropped += a.dropped;
    });
    const refusals: unknown[] = [];
    producer.on('refused', (r) => refusals.push(r));
    await producer.connect();
    const streams: ProducerStream[] = [];
    for (const name of names) {
      streams.push(await producer.declare({ name, operator: feed.operator, solver: { method: 'lasso' }, queue: { capacity: 16, policy: 'refuse_new' } }));
    }

    let sent = 0;
    const sendRound = async () => {
      const writes: Promise<void>[] = [];
      for (let k = 0; k < FRAMES_PER_ROUND; k++) {
        for (const s of streams) writes.push(s.send(feed.measurements(s.nextSeq)));
        sent += streams.length;
      }
      await Promise.all(writes);
    };

    // Each round: frames queued on both workers, then one worker throws or is terminated while
    // it works through them; the next round starts once everything sent so far is acknowledged.
    let expectedColdStarts = STREAMS; // every stream's first frame
    let throws = 0;
    let deaths = 0;
    for (let f = 0; f < FAULTS; f++) {
      await sendRound();
      const homes = await daemon.request<Record<string, number>>('assignments');
      const victim = f % 2;
      if (f % 4 < 2) {
        await daemon.request('throwInWorker', { index: victim });
        throws++;
      } else {
        await daemon.request('killWorker', { index: victim });
        deaths++;
      }
      await eventually(async () => metricValue(await daemon.request<string>('metrics'), 'sparsewire_workers_replaced_total') === f + 1, `worker replacement ${f + 1}`, 30_000);
      expectedColdStarts += names.filter((n) => homes[n] === victim).length;
      await Promise.all(streams.map((s) => s.drained()));
    }
    await sendRound();
    await Promise.all(streams.map((s) => s.drained()));
    await eventually(() => [...results.values()].every((r) => r.length === sent / STREAMS), 'every result delivered', 30_000);

    // Nothing accepted was lost: every frame solved, acknowledged and published, in order.
    expect(refusals).toEqual([]);
    expect(acks).toEqual({ solved: sent, dropped: 0 });
    expect(missed).toEqual([]);
    for (const [, rs] of results) expect(rs.map((r) => r.seq)).toEqual([...Array(sent / STREAMS).keys()]);
    // The affected frames say so: one cold start per stream at first, plus one per stream re-homed.
    const coldStarts = [...results.values()].flat().filter((r) => r.flags.includes('cold_start')).length;
    expect(coldStarts).toBe(expectedColdStarts);
    // Recovered values are right after re-homing too (relative residual of an exact solve).
    for (const rs of results.values()) for (const r of rs) expect(r.evidence.relative_residual).toBeLessThan(0.05);

    // The daemon stayed up with its full pool.
    expect(daemon.alive).toBe(true);
    const health = (await (await fetch(`${daemon.url}/v1/health`)).json()) as { status: string; workers: number };
    expect(health).toMatchObject({ status: 'ok', workers: 2 });
    await producer.close();
    await subscriber.close();
    recordFigures('faults: solver workers that throw or die', {
      faults: FAULTS,
      worker_throws: throws,
      worker_deaths: deaths,
      frames_sent: sent,
      results_received: [...results.values()].reduce((n, r) => n + r.length, 0),
      frames_lost: sent - acks.solved,
      frames_dropped: acks.dropped,
      cold_start_flags: coldStarts,
      daemon_exits: daemon.alive ? 0 : 1,
    });
  });

  it('a worker that dies while building a stream’s operator: the declaration still succeeds on its successor', async () => {
    const producer = new Producer({ url: daemon.url });
    await producer.connect();
    // A 256 × 1024 Gaussian operator takes a while to build (its norm bound is certified from the Gram matrix).
    const declaring = producer.declare({ name: 'fault.building', operator: { kind: 'gaussian', rows: 256, cols: 1024, seed: 3 }, solver: { method: 'lasso' } });
    const before = metricValue(await daemon.request<string>('metrics'), 'sparsewire_workers_replaced_total');
    await Promise.all([daemon.request('killWorker', { index: 0 }), daemon.request('killWorker', { index: 1 })]);
    const stream = await declaring;
    await stream.send(new Float64Array(2 * 256).fill(0.5));
    await stream.drained();
    expect(metricValue(await daemon.request<string>('metrics'), 'sparsewire_workers_replaced_total')).toBe(before + 2);
    expect(daemon.alive).toBe(true);
    await producer.close();
    recordFigures('faults: worker dies while building an operator', { faults: 2, declarations_lost: 0, daemon_exits: daemon.alive ? 0 : 1 });
  });
});
