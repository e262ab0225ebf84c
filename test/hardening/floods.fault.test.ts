import net from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Producer, Subscriber, type ProducerStream, type Result } from '../../clients/index.js';
import { eventually, metricValue } from '../../daemon/test/helpers.js';
import { dftStream } from '../../daemon/test/synthetic.js';
import { encode, float64ToBin, type MissedMessage } from '../../protocol/index.js';
import { DaemonProcess, mib, MiB, type MemorySample } from './support/daemonProcess.js';
import { byScale, recordFigures } from './support/scale.js';
import { RawSocket } from './support/wire.js';

// Resource abuse against a daemon process: a producer that floods past its credits and never
// reads its replies, a subscriber that never reads, peers that stop answering pings, and
// thousands of connections opened and dropped. Oracle (docs/daemon.md, "Limits", "Queue and lag
// policies", "Heartbeat"; DESIGN §5): memory after forced garbage collection returns to within a
// fixed bound of where it started, every frame is accounted for (solved, refused with a reason,
// or dropped and announced), and a well-behaved producer and subscriber lose nothing.

const LIMITS = { outboxHighBytes: 256 * 1024, outboxLowBytes: 64 * 1024, outboxHardCapBytes: 2 * MiB, outboxMaxNotices: 200 };
/** Heap growth allowed after each attack (forced GC): a per-message or per-connection leak would exceed it. */
const HEAP_BOUND = 32 * MiB;
/** Resident memory growth allowed (allocator caches and worker arenas stay; a leak would not fit). */
const RSS_BOUND = 160 * MiB;

const feed = dftStream(256, 64);
const declaration = (name: string, queue?: { capacity: number; policy: 'refuse_new' | 'drop_oldest' | 'keep_latest' }) => ({
  name,
  operator: feed.operator,
  solver: { method: 'lasso' as const, maxIterations: 200 },
  ...(queue ? { queue } : {}),
});

/** A producer and a subscriber that follow the rules, on their own stream, during an attack. */
class Bystander {
  readonly results: Result[] = [];
  readonly missed: MissedMessage[] = [];
  private producer!: Producer;
  private subscriber!: Subscriber;
  private stream!: ProducerStream;
  private pumping: Promise<void> | undefined;
  private stopped = false;

  constructor(
    private readonly url: string,
    readonly name: string,
  ) {}

  async start(): Promise<void> {
    this.subscriber = new Subscriber({ url: this.url });
    this.subscriber.on('result', (r) => r.stream === this.name && this.results.push(r));
    this.subscriber.on('missed', (m) => this.missed.push(m));
    await this.subscriber.connect();
    await this.subscriber.subscribe({ streams: this.name, want: ['coefficients'], whenBehind: 'drop_with_notice' });
    this.producer = new Producer({ url: this.url });
    await this.producer.connect();
    this.stream = await this.producer.declare(declaration(this.name));
    // Honours credits (the client library waits for them) and keeps a few frames going.
    this.pumping = (async () => {
      while (!this.stopped) {
        await this.stream.send(feed.measurements(this.stream.nextSeq));
        await new Promise((r) => setTimeout(r, 5));
      }
    })();
  }

  /** Stops sending, waits for every result; the bystander must have lost nothing. */
  async finish(): Promise<number> {
    this.stopped = true;
    await this.pumping;
    await this.stream.drained();
    await eventually(() => this.results.length === this.stream.nextSeq, `${this.name}: every result`, 30_000);
    expect(this.results.map((r) => r.seq)).toEqual([...Array(this.stream.nextSeq).keys()]);
    expect(this.missed).toEqual([]);
    await this.producer.close({ closeStreams: true });
    await this.subscriber.close();
    return this.stream.nextSeq;
  }
}

describe('floods, silent peers and connection churn', () => {
  let daemon: DaemonProcess;
  let baseline: MemorySample;
  const ws = () => daemon.url.replace(/^http/, 'ws');

  beforeAll(async () => {
    daemon = await DaemonProcess.fixture({ workers: 2, logLevel: 'warn', limits: LIMITS as never });
    // Warm up once (first connections, first stream, worker code paths) so growth is measured from a settled state.
    const warm = new Bystander(daemon.url, 'warmup');
    await warm.start();
    await new Promise((r) => setTimeout(r, 200));
    await warm.finish();
    baseline = await daemon.memory();
  });
  afterAll(async () => {
    await daemon?.stop();
  });

  /** Memory after forced GC against the baseline; asserts the bounds and returns the figures. */
  async function memoryHeld(): Promise<Record<string, number>> {
    const now = await daemon.memory();
    expect(now.gcForced).toBe(true);
    expect(now.heapUsed - baseline.heapUsed).toBeLessThan(HEAP_BOUND);
    expect(now.rss - baseline.rss).toBeLessThan(RSS_BOUND);
    return {
      heap_growth_mib: mib(now.heapUsed - baseline.heapUsed),
      heap_bound_mib: mib(HEAP_BOUND),
      rss_growth_mib: mib(now.rss - baseline.rss),
      rss_bound_mib: mib(RSS_BOUND),
    };
  }

  it('a producer that floods past its credits and never reads: every frame accounted for, memory bounded', async () => {
    const bystander = new Bystander(daemon.url, 'flood.bystander');
    await bystander.start();
    const FLOOD = byScale({ ci: 4000, report: 40_000, soak: 400_000 });
    const policies = ['refuse_new', 'drop_oldest', 'keep_latest'] as const;
    const outcome: Record<string, number> = { sent: 0, solved: 0, dropped: 0, refused: 0 };
    let peakRss = 0;
    for (const policy of policies) {
      // An honest stream declared by the flooder, then frames far past its 8 credits.
      const flooder = await RawSocket.open(`${ws()}/v1/produce`);
      const name = `flood.${policy}`;
      flooder.send(encode({ v: 1, type: 'declare', ref: 'd', stream: declaration(name, { capacity: 8, policy }) }));
      await flooder.until(() => flooder.received.some((m) => m.type === 'declared'), 'declared');
      const y = float64ToBin(feed.measurements(0));
      const perPolicy = Math.floor(FLOOD / policies.length);
      for (let seq = 0; seq < perPolicy; seq++) {
        flooder.send(encode({ v: 1, type: 'frame', stream: name, seq, time: seq, y }));
        if (seq % 500 === 0) {
          await new Promise((r) => setImmediate(r));
          peakRss = Math.max(peakRss, daemon.rssBytes());
        }
      }
      // Every frame is answered: refused at once, or acknowledged as solved or dropped.
      const counts = () => {
        let solved = 0;
        let dropped = 0;
        let refused = 0;
        for (const m of flooder.received) {
          if (m.type === 'ack') ((solved += m.solved), (dropped += m.dropped));
          if (m.type === 'refused') refused++;
        }
        return { solved, dropped, refused };
      };
      await flooder.until(() => {
        const c = counts();
        return c.solved + c.dropped + c.refused === perPolicy;
      }, `${policy}: every flooded frame accounted for`, 120_000);
      const c = counts();
      if (policy === 'refuse_new') expect(c.refused).toBeGreaterThan(0);
      else expect(c.dropped).toBeGreaterThan(0);
      outcome.sent += perPolicy;
      outcome.solved += c.solved;
      outcome.dropped += c.dropped;
      outcome.refused += c.refused;
      flooder.close();
    }

    // The same, from a producer that never reads a single reply (its socket paused from the start).
    const mute = await RawSocket.open(`${ws()}/v1/produce`);
    mute.send(encode({ v: 1, type: 'declare', ref: 'd', stream: declaration('flood.mute', { capacity: 8, policy: 'refuse_new' }) }));
    await mute.until(() => mute.received.some((m) => m.type === 'declared'), 'declared');
    mute.ws.pause();
    const y = float64ToBin(feed.measurements(0));
    for (let seq = 0; seq < FLOOD && mute.ws.readyState === mute.ws.OPEN; seq++) {
      mute.send(encode({ v: 1, type: 'frame', stream: 'flood.mute', seq, time: seq, y }));
      if (seq % 500 === 0) await new Promise((r) => setImmediate(r));
    }
    mute.close();
    const sent = await bystander.finish();
    expect(daemon.alive).toBe(true);
    recordFigures('flood: producer past its credits (3 queue policies) and one that never reads', {
      frames_flooded: outcome.sent,
      solved: outcome.solved,
      dropped_and_announced: outcome.dropped,
      refused_with_reason: outcome.refused,
      unaccounted: outcome.sent - outcome.solved - outcome.dropped - outcome.refused,
      mute_frames: FLOOD,
      bystander_frames: sent,
      bystander_frames_lost: 0,
      peak_rss_mib: mib(peakRss),
      daemon_exits: 0,
      ...(await memoryHeld()),
    });
  });

  it('a subscriber that never reads: its outbox stays under the hard cap or it is cut off; others get everything', async () => {
    const bystander = new Bystander(daemon.url, 'stall.bystander');
    await bystander.start();
    const policies = ['keep_latest', 'drop_with_notice', 'disconnect'] as const;
    const stalled = await Promise.all(
      policies.map(async (policy) => {
        const s = await RawSocket.open(`${ws()}/v1/watch`);
        s.send(encode({ v: 1, type: 'subscribe', ref: 's', streams: 'stall.*', want: ['coefficients', 'signal', 'measurements'], when_behind: policy }));
        await s.until(() => s.received.some((m) => m.type === 'subscribed'), 'subscribed');
        s.ws.pause();
        return { policy, socket: s };
      }),
    );
    // Large results (a 4096-point signal, 64 KiB each) as fast as credits allow, from a quick greedy solver.
    const big = dftStream(4096, 128);
    const producer = new Producer({ url: daemon.url });
    await producer.connect();
    const loud = await producer.declare({ name: 'stall.loud', operator: big.operator, solver: { method: 'omp', sparsity: 4 }, queue: { capacity: 32, policy: 'refuse_new' } });
    const FRAMES = byScale({ ci: 600, report: 6000, soak: 60_000 });
    let maxPending = 0;
    let peakRss = 0;
    const y = big.measurements(0);
    for (let k = 0; k < FRAMES; k++) {
      await loud.send(y);
      if (k % 50 === 0) {
        const outboxes = await daemon.request<Array<{ pendingBytes: number; closed: boolean }>>('outboxes');
        for (const o of outboxes) if (!o.closed) maxPending = Math.max(maxPending, o.pendingBytes);
        peakRss = Math.max(peakRss, daemon.rssBytes());
      }
    }
    await loud.drained();
    // The hard cap holds (the message that crosses it is the last one written).
    expect(maxPending).toBeGreaterThan(LIMITS.outboxHighBytes);
    expect(maxPending).toBeLessThan(LIMITS.outboxHardCapBytes + 128 * 1024);
    const metrics = await daemon.request<string>('metrics');
    const closedFor = (reason: string) => metricValue(metrics, 'sparsewire_connections_closed_total', { endpoint: 'watch', reason });
    // when_behind: disconnect closes its connection; the other two stay under the cap, holding or skipping results.
    expect(closedFor('fell_behind')).toBe(1);
    const skipped = metricValue(metrics, 'sparsewire_results_missed_total');
    expect(skipped).toBeGreaterThan(0);
    const sent = await bystander.finish();
    for (const { socket } of stalled) socket.close();
    await producer.close({ closeStreams: true });
    recordFigures('flood: subscribers that never read (3 lag policies)', {
      results_pushed: FRAMES,
      result_kib: 64,
      stalled_subscribers: stalled.length,
      max_outbox_mib: mib(maxPending),
      outbox_hard_cap_mib: mib(LIMITS.outboxHardCapBytes),
      cut_off_fell_behind: closedFor('fell_behind'),
      cut_off_hard_cap: closedFor('hard_cap'),
      results_skipped_for_stalled: skipped,
      bystander_frames: sent,
      bystander_frames_lost: 0,
      peak_rss_mib: mib(peakRss),
      daemon_exits: 0,
      ...(await memoryHeld()),
    });
  });

  it('peers that stop answering pings are cut off after one missed heartbeat', async () => {
    // Long enough that a busy machine still delivers the answering peer's pongs in time.
    const HEARTBEAT_MS = 1000;
    const quick = await DaemonProcess.fixture({ workers: 1, logLevel: 'warn', heartbeatMs: HEARTBEAT_MS });
    try {
      const url = quick.url.replace(/^http/, 'ws');
      const silent = await Promise.all(['/v1/produce', '/v1/watch', '/v1/produce', '/v1/watch'].map((p) => RawSocket.open(`${url}${p}`, { autoPong: false })));
      // A peer that stops reading altogether does not answer either.
      const stalled = await RawSocket.open(`${url}/v1/watch`);
      stalled.ws.pause();
      const answering = await RawSocket.open(`${url}/v1/watch`);
      for (const s of silent) await s.until(() => s.closed !== undefined, 'the silent peer to be cut off', 20_000);
      await eventually(async () => metricValue(await quick.request<string>('metrics'), 'sparsewire_connections_closed_total', { reason: 'no_pong' }) === silent.length + 1, 'the stalled peer to be cut off');
      // The peer that answers stays connected across the same heartbeats.
      await new Promise((r) => setTimeout(r, 3 * HEARTBEAT_MS));
      expect(answering.closed).toBeUndefined();
      answering.close();
      stalled.close();
      recordFigures('faults: peers that stop answering pings', { silent_peers: silent.length + 1, cut_off: silent.length + 1, answering_peers_cut_off: 0, heartbeat_ms: HEARTBEAT_MS });
    } finally {
      await quick.stop();
    }
  });

  it('thousands of connections opened and dropped: nothing is left behind', async () => {
    const TOTAL = byScale({ ci: 2000, report: 10_000, soak: 100_000 });
    const BATCH = 100;
    const kinds = { clean_close: 0, abrupt: 0, declared_then_abrupt: 0, subscribed_then_abrupt: 0, half_open_tcp: 0 };
    let peakRss = 0;
    for (let opened = 0; opened < TOTAL; opened += BATCH) {
      await Promise.all(
        Array.from({ length: BATCH }, async (_, i) => {
          const n = opened + i;
          switch (n % 5) {
            case 0: {
              const s = await RawSocket.open(`${ws()}/v1/watch`);
              s.ws.close();
              kinds.clean_close++;
              return;
            }
            case 1: {
              const s = await RawSocket.open(`${ws()}/v1/produce`);
              s.close();
              kinds.abrupt++;
              return;
            }
            case 2: {
              const s = await RawSocket.open(`${ws()}/v1/produce`);
              s.send(encode({ v: 1, type: 'declare', ref: 'd', stream: declaration(`churn.${n % 20}`) }));
              await s.until(() => s.received.length > 0, 'declare answered');
              s.close();
              kinds.declared_then_abrupt++;
              return;
            }
            case 3: {
              const s = await RawSocket.open(`${ws()}/v1/watch`);
              s.send(encode({ v: 1, type: 'subscribe', ref: 's', streams: '*', want: ['quality', 'alerts'], when_behind: 'keep_latest' }));
              await s.until(() => s.received.length > 0, 'subscribed');
              s.close();
              kinds.subscribed_then_abrupt++;
              return;
            }
            default: {
              // A TCP connection that starts a handshake and vanishes mid-way.
              await new Promise<void>((resolve) => {
                const sock = net.connect(daemon.port, '127.0.0.1', () => {
                  sock.write('GET /v1/watch HTTP/1.1\r\nHost: x\r\nUpgrade: websocket\r\n');
                  sock.destroy();
                  resolve();
                });
                sock.on('error', () => resolve());
              });
              kinds.half_open_tcp++;
            }
          }
        }),
      );
      peakRss = Math.max(peakRss, daemon.rssBytes());
    }
    // Every connection is gone from the daemon's books.
    await eventually(async () => {
      const h = (await (await fetch(`${daemon.url}/v1/health`)).json()) as { producers: number; subscribers: number };
      return h.producers === 0 && h.subscribers === 0;
    }, 'no connection left open', 30_000);
    expect(daemon.alive).toBe(true);
    recordFigures('churn: connections opened and dropped', { connections: TOTAL, ...kinds, left_open: 0, peak_rss_mib: mib(peakRss), daemon_exits: 0, ...(await memoryHeld()) });
  });
});
