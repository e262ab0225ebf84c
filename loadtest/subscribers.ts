import WebSocket from 'ws';
import { endpointUrl, type ConnectionOptions } from '../clients/connection.js';
import { Subscriber } from '../clients/subscriber.js';
import { decode, encode, MAX_MESSAGE_BYTES, type BehindPolicy, type DaemonToSubscriber, type MissedMessage } from '../protocol/index.js';
import { FailureLog } from './failures.js';
import type { LatencyRecorder } from './latency.js';

/** What one subscriber received, cumulative since it subscribed. */
export interface SubscriberCounts {
  results: number;
  /** Results it did not get because it fell behind (`missed`, reason subscriber_behind). */
  missedBehind: number;
  /** Frames the daemon dropped, as announced to it (`missed` with any other reason). */
  missedDropped: number;
  /** `missed` notices received (each may cover many frames). */
  missedNotices: number;
  alerts: number;
  streamEvents: number;
  bytes: number;
}

function emptyCounts(): SubscriberCounts {
  return { results: 0, missedBehind: 0, missedDropped: 0, missedNotices: 0, alerts: 0, streamEvents: 0, bytes: 0 };
}

function countMissed(counts: SubscriberCounts, msg: MissedMessage): void {
  counts.missedNotices++;
  if (msg.reason === 'subscriber_behind') counts.missedBehind += msg.count;
  else counts.missedDropped += msg.count;
}

/** The epoch-millisecond clock the producers stamp frames with (performance.timeOrigin + now). */
export const epochNow = (): number => performance.timeOrigin + performance.now();

/**
 * The reference subscriber: a fast reader of every load stream through the client library
 * (quality only, so results stay small). It times each result against its frame's scheduled
 * send time and sees every drop notice, which makes it the witness of the accounting check.
 */
export class ReferenceSubscriber {
  readonly counts = emptyCounts();
  readonly failures = new FailureLog();
  /**
   * Where latencies go (and the solver time the daemon reports for the same frames), and the
   * earliest scheduled time (epoch ms) that counts.
   */
  window: { recorder: LatencyRecorder; solves: LatencyRecorder; fromEpochMs: number } | null = null;
  readonly #subscriber: Subscriber;

  private constructor(options: ConnectionOptions) {
    this.#subscriber = new Subscriber(options);
    this.#subscriber.on('result', (r) => {
      this.counts.results++;
      const w = this.window;
      if (w && r.time >= w.fromEpochMs) {
        w.recorder.record(epochNow() - r.time);
        w.solves.record(r.evidence.solve_ms);
      }
    });
    this.#subscriber.on('missed', (m) => countMissed(this.counts, m));
    this.#subscriber.on('alert', () => this.counts.alerts++);
    this.#subscriber.on('streamEvent', () => this.counts.streamEvents++);
    this.#subscriber.on('daemonError', (e) => this.failures.add(`daemon error to the reference subscriber: ${e.code}: ${e.detail}`));
    this.#subscriber.on('disconnected', (info) => {
      if (info.retryInMs !== null) this.failures.add(`reference subscriber lost its connection (${info.code} ${info.reason || 'no reason'})`);
    });
  }

  static async open(options: ConnectionOptions, pattern: string): Promise<ReferenceSubscriber> {
    const s = new ReferenceSubscriber(options);
    await s.#subscriber.connect();
    await s.#subscriber.subscribe({ streams: pattern, want: ['quality', 'alerts'], whenBehind: 'drop_with_notice' });
    return s;
  }

  close(): Promise<void> {
    return this.#subscriber.close();
  }
}

/** How long a slow subscriber waits before it reconnects after the daemon closed it. */
const RECONNECT_DELAY_MS = 1000;

/**
 * A deliberately slow subscriber: it asks for the heavy parts of every result (coefficients and
 * the frame's measurements) and reads its socket at a fixed byte rate, pausing the socket when
 * it is ahead of its allowance — so the daemon sees a consumer whose TCP window stays full.
 * When the daemon closes it (its when_behind policy, the outbox's hard cap, or a ping it could not
 * answer in time behind its backlog) it reconnects a second later, as a dashboard would.
 */
export class SlowSubscriber {
  readonly counts = emptyCounts();
  readonly failures = new FailureLog();
  /** Closures by the daemon, in order (code and reason as the client saw them). */
  readonly closedByDaemon: Array<{ code: number; reason: string }> = [];
  #ws: WebSocket | null = null;
  #closing = false;
  #readBytes = 0;
  #readingSince = 0;
  #resumeTimer: NodeJS.Timeout | undefined;
  #reconnectTimer: NodeJS.Timeout | undefined;

  private constructor(
    private readonly options: ConnectionOptions,
    private readonly pattern: string,
    readonly policy: BehindPolicy,
    private readonly bytesPerSecond: number,
  ) {}

  static async open(options: ConnectionOptions, pattern: string, policy: BehindPolicy, bytesPerSecond: number): Promise<SlowSubscriber> {
    const s = new SlowSubscriber(options, pattern, policy, bytesPerSecond);
    await s.#connect();
    return s;
  }

  async #connect(): Promise<void> {
    const headers: Record<string, string> = this.options.token ? { authorization: `Bearer ${this.options.token}` } : {};
    const ws = new WebSocket(endpointUrl(this.options.url, '/v1/watch'), { headers, perMessageDeflate: false, maxPayload: MAX_MESSAGE_BYTES });
    await new Promise<void>((resolve, reject) => {
      ws.once('open', () => resolve());
      ws.once('error', reject);
    });
    const subscribed = new Promise<void>((resolve, reject) => {
      const onMessage = (data: Buffer) => {
        const msg = decode(data);
        if (msg.type === 'subscribed') resolve();
        else if (msg.type === 'error') reject(new Error(`slow subscriber refused: ${msg.code}: ${msg.detail}`));
        else return;
        ws.off('message', onMessage);
      };
      ws.on('message', onMessage);
    });
    ws.on('message', (data: Buffer) => this.#receive(ws, data));
    ws.on('error', (err) => this.failures.add(`slow subscriber socket error: ${err.message}`));
    ws.on('close', (code, reason) => {
      clearTimeout(this.#resumeTimer);
      this.#resumeTimer = undefined;
      if (this.#closing) return;
      this.closedByDaemon.push({ code, reason: reason.toString() });
      this.#reconnectTimer = setTimeout(() => {
        this.#connect().catch((err: Error) => this.failures.add(`slow subscriber could not reconnect: ${err.message}`));
      }, RECONNECT_DELAY_MS);
    });
    ws.send(encode({ v: 1, type: 'subscribe', ref: 'slow', streams: this.pattern, want: ['coefficients', 'measurements', 'alerts'], when_behind: this.policy }));
    await subscribed;
    this.#ws = ws;
    this.#readBytes = 0;
    this.#readingSince = performance.now();
  }

  #receive(ws: WebSocket, data: Buffer): void {
    this.counts.bytes += data.byteLength;
    this.#readBytes += data.byteLength;
    let msg: DaemonToSubscriber;
    try {
      msg = decode(data) as DaemonToSubscriber;
    } catch (err) {
      this.failures.add(`slow subscriber got an undecodable message: ${(err as Error).message}`);
      return;
    }
    if (msg.type === 'result') this.counts.results++;
    else if (msg.type === 'missed') countMissed(this.counts, msg);
    else if (msg.type === 'alert') this.counts.alerts++;
    else if (msg.type === 'stream_event') this.counts.streamEvents++;
    else if (msg.type === 'error') this.failures.add(`daemon error to a slow subscriber: ${msg.code}: ${msg.detail}`);
    // Ahead of the allowance: stop reading until the allowance catches up.
    const allowed = ((performance.now() - this.#readingSince) / 1000) * this.bytesPerSecond;
    const ahead = this.#readBytes - allowed;
    if (ahead > 0 && this.#resumeTimer === undefined && ws === this.#ws) {
      ws.pause();
      this.#resumeTimer = setTimeout(() => {
        this.#resumeTimer = undefined;
        if (!this.#closing && ws.readyState === WebSocket.OPEN) ws.resume();
      }, (1000 * ahead) / this.bytesPerSecond);
    }
  }

  async close(): Promise<void> {
    this.#closing = true;
    clearTimeout(this.#resumeTimer);
    clearTimeout(this.#reconnectTimer);
    const ws = this.#ws;
    if (ws === null || ws.readyState === WebSocket.CLOSED) return;
    await new Promise<void>((resolve) => {
      ws.once('close', () => resolve());
      ws.terminate();
    });
  }
}
