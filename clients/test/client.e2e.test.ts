import { afterEach, describe, expect, it } from 'vitest';
import type { RunningDaemon } from '../../daemon/index.js';
import { GearboxFeed, TelemetryFeed } from '../feeds/index.js';
import { AccessRefusedError, DaemonError, Producer, Subscriber, type Result } from '../index.js';
import { scratchDir, startTestDaemon, waitUntil } from './helpers.js';

const cleanups: Array<() => Promise<void> | void> = [];
afterEach(async () => {
  for (const cleanup of cleanups.splice(0).reverse()) await cleanup();
});

async function daemon(overrides: Parameters<typeof startTestDaemon>[0] = {}): Promise<RunningDaemon> {
  const d = await startTestDaemon(overrides);
  cleanups.push(() => d.close());
  return d;
}

function client<T extends Producer | Subscriber>(c: T): T {
  cleanups.push(() => c.close());
  return c;
}

const fastBackoff = { initialMs: 20, maxMs: 200 };

describe('client library against a real daemon', () => {
  it('declares, sends with credits, and receives every result in order with decoded payloads', async () => {
    const d = await daemon();
    const feed = new TelemetryFeed({ seed: 1 });
    // A queue of 2 means only two credits at a time: the producer must wait for more.
    const declaration = { ...feed.declaration, queue: { capacity: 2, policy: 'refuse_new' as const } };
    const subscriber = client(new Subscriber({ url: d.url }));
    await subscriber.connect();
    const results: Result[] = [];
    subscriber.on('result', (r) => results.push(r));
    await subscriber.subscribe({ streams: 'telemetry.*', want: ['coefficients', 'top_k', 'measurements'], topK: 3, whenBehind: 'drop_with_notice' });

    const producer = client(new Producer({ url: d.url }));
    const refusals: unknown[] = [];
    producer.on('refused', (r) => refusals.push(r));
    await producer.connect();
    const stream = await producer.declare(declaration);
    expect(stream.credits).toBeLessThanOrEqual(2);
    const truths: Float64Array[] = [];
    const sent: Promise<void>[] = [];
    for (let f = 0; f < 25; f++) {
      sent.push(stream.send(feed.next(), { time: 1000 + f }));
      const t = feed.truth();
      const dense = new Float64Array(2 * feed.operator.cols);
      t.indices.forEach((j, i) => ((dense[2 * j] = t.values[2 * i]!), (dense[2 * j + 1] = t.values[2 * i + 1]!)));
      truths.push(dense);
    }
    // Not all could go at once: credits held some back, and nothing was refused.
    expect(stream.pendingCount).toBeGreaterThan(0);
    await Promise.all(sent);
    await stream.drained();
    await waitUntil(() => results.length === 25, '25 results');
    expect(refusals).toEqual([]);
    expect(results.map((r) => r.seq)).toEqual([...Array(25).keys()]);
    for (const [f, r] of results.entries()) {
      expect(r.time).toBe(1000 + f);
      // The coefficients come back as aligned typed arrays near the feed's truth.
      const dense = new Float64Array(2 * feed.operator.cols);
      r.coefficients!.indices.forEach((j, i) => ((dense[2 * j] = r.coefficients!.values[2 * i]!), (dense[2 * j + 1] = r.coefficients!.values[2 * i + 1]!)));
      const err = Math.hypot(...dense.map((v, i) => v - truths[f]![i]!)) / Math.hypot(...truths[f]!);
      expect(err).toBeLessThan(0.05);
      expect(r.top_k!.indices.length).toBe(3);
      expect(r.y).toHaveLength(2 * feed.operator.rows);
    }
  });

  it('reports a daemon error on declare with the field at fault', async () => {
    const d = await daemon();
    const producer = client(new Producer({ url: d.url }));
    await producer.connect();
    const bad = { ...new GearboxFeed().declaration, operator: { kind: 'sampling', n: 512, samples: { law: 'uniform', m: 600, seed: 1 } } };
    const err = await producer.declare(bad).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(DaemonError);
    expect((err as DaemonError).field).toMatch(/^stream\.operator\./);
  });

  it('fails fast with a clear error when the token is refused', async () => {
    const d = await daemon({ tokens: [{ token: 'right-token-123', roles: ['produce'], streams: ['*'] }] });
    const producer = new Producer({ url: d.url, token: 'wrong' });
    await expect(producer.connect()).rejects.toBeInstanceOf(AccessRefusedError);
    await producer.close();
  });

  it('resumes after the daemon restarts: every result exactly once, in order', async () => {
    const state = scratchDir('restart');
    cleanups.push(state.remove);
    let d = await startTestDaemon({ stateDir: state.path });
    const port = d.port;
    const feed = new GearboxFeed({ seed: 2 });
    const subscriber = client(new Subscriber({ url: d.url, backoff: fastBackoff }));
    const seqs: number[] = [];
    subscriber.on('result', (r) => seqs.push(r.seq));
    await subscriber.connect();
    await subscriber.subscribe({ streams: feed.declaration.name, want: ['quality'], whenBehind: 'drop_with_notice' });
    const producer = client(new Producer({ url: d.url, backoff: fastBackoff }));
    const finalRefusals: unknown[] = [];
    producer.on('refused', (msg, willResend) => willResend || finalRefusals.push(msg));
    let reconnects = 0;
    producer.on('connected', (again) => (reconnects += again ? 1 : 0));
    await producer.connect();
    const stream = await producer.declare(feed.declaration);

    const total = 60;
    const sending = (async () => {
      for (let f = 0; f < total; f++) {
        await stream.send(feed.next());
        await new Promise((r) => setTimeout(r, 5));
      }
    })();
    await waitUntil(() => seqs.length >= 20, 'results before the restart');
    await d.close('restart drill');
    d = await startTestDaemon({ stateDir: state.path, port });
    cleanups.push(() => d.close());
    await sending;
    await stream.drained();
    await waitUntil(() => seqs.length >= total, `all ${total} results (have ${seqs.length})`, 30_000);
    expect(reconnects).toBeGreaterThanOrEqual(1);
    expect(finalRefusals).toEqual([]);
    expect(seqs).toEqual([...Array(total).keys()]);
  });

  it('resumes after a dropped connection without losing or repeating frames', async () => {
    const d = await daemon();
    const feed = new GearboxFeed({ seed: 3 });
    const subscriber = client(new Subscriber({ url: d.url, backoff: fastBackoff }));
    const seqs: number[] = [];
    subscriber.on('result', (r) => seqs.push(r.seq));
    await subscriber.connect();
    await subscriber.subscribe({ streams: '*', want: ['quality'], whenBehind: 'drop_with_notice' });
    const producer = client(new Producer({ url: d.url, backoff: fastBackoff }));
    await producer.connect();
    const stream = await producer.declare(feed.declaration);
    for (let f = 0; f < 40; f++) {
      const sending = stream.send(feed.next());
      if (f === 15) producer.interrupt();
      if (f === 25) subscriber.interrupt();
      await sending;
    }
    await stream.drained();
    await waitUntil(() => seqs.length >= 40, 'all 40 results');
    expect(seqs).toEqual([...Array(40).keys()]);
  });

  it('closes a stream cleanly: the subscriber hears of it and the name can be declared afresh', async () => {
    const d = await daemon();
    const feed = new GearboxFeed({ seed: 4 });
    const subscriber = client(new Subscriber({ url: d.url }));
    const events: string[] = [];
    subscriber.on('streamEvent', (e) => events.push(`${e.event}:${e.stream}`));
    await subscriber.connect();
    await subscriber.subscribe({ streams: '*', want: ['quality'], whenBehind: 'keep_latest' });
    const producer = client(new Producer({ url: d.url }));
    await producer.connect();
    const stream = await producer.declare(feed.declaration);
    for (let f = 0; f < 3; f++) await stream.send(feed.next());
    await stream.close();
    await waitUntil(() => events.includes(`closed:${feed.declaration.name}`), 'the closed event');
    const again = await producer.declare(feed.declaration);
    expect(again.nextSeq).toBe(0);
  });
});
