import { ReconnectingConnection, type ConnectionOptions } from '../clients/connection.js';
import { pack } from 'msgpackr';
import type { DaemonToProducer, FrameMessage, Message } from '../protocol/index.js';
import { FailureLog } from './failures.js';
import type { LoadStream } from './scenarios.js';

/**
 * A frame message as the protocol's `encode` would pack it, without re-validating a message this
 * module builds itself on the hot path (the daemon validates every frame it receives, and a test
 * decodes these bytes with the protocol's codec).
 */
export function packFrame(stream: string, seq: number, time: number, y: Uint8Array): Uint8Array {
  const msg: FrameMessage = { v: 1, type: 'frame', stream, seq, time, y };
  return pack(msg);
}

/** Frame counts from the producers' side, cumulative since the connections opened. */
export interface ProducerCounts {
  sent: number;
  /** Solved and dropped as the daemon's acks count them. */
  ackedSolved: number;
  ackedDropped: number;
  refused: number;
}

/**
 * The load's producers: a few WebSocket connections carrying many streams each, sending like
 * sensor front ends do — on their own schedule, without waiting for credit. A frame that meets
 * a full queue is therefore refused or displaces another frame by the stream's declared policy;
 * every frame is answered (refused at once, or counted in an ack once solved or dropped).
 */
export class LoadProducers {
  readonly counts: ProducerCounts = { sent: 0, ackedSolved: 0, ackedDropped: 0, refused: 0 };
  readonly refusedByReason = new Map<string, number>();
  /** Credits the daemon granted (the producers do not wait for them; reported for reference). */
  creditsGranted = 0;
  /** Unexpected events: lost connections, daemon errors, failed writes. */
  readonly failures = new FailureLog();
  readonly #connections: ReconnectingConnection[] = [];
  readonly #connectionOf: number[];
  readonly #nextSeq: Float64Array;
  readonly #waiting = new Map<string, { resolve: () => void; reject: (err: Error) => void }>();
  #refCounter = 0;

  constructor(
    private readonly options: ConnectionOptions,
    private readonly streams: LoadStream[],
    streamsPerConnection: number,
  ) {
    this.#connectionOf = streams.map((s) => Math.floor(s.index / streamsPerConnection));
    this.#nextSeq = new Float64Array(streams.length);
  }

  get connectionCount(): number {
    return this.#connections.length;
  }

  async connect(): Promise<void> {
    const count = Math.max(1, ...this.#connectionOf.map((c) => c + 1));
    for (let i = 0; i < count; i++) {
      const connection = new ReconnectingConnection(this.options, '/v1/produce');
      connection.on('message', (msg) => this.#dispatch(msg as DaemonToProducer));
      connection.on('down', (info) => {
        if (info.retryInMs !== null) this.#fail(`producer connection ${i} lost (${info.code} ${info.reason || 'no reason'})`);
      });
      connection.on('garbled', (err) => this.#fail(`producer connection ${i}: undecodable message from the daemon: ${err.message}`));
      await connection.start();
      this.#connections.push(connection);
    }
  }

  /** Declares every stream and resolves once the daemon has accepted them all. */
  async declareAll(timeoutMs: number): Promise<void> {
    const replies = this.streams.map((s) => this.#request((ref) => ({ v: 1, type: 'declare', ref, stream: s.declaration }), s));
    await withTimeout(Promise.all(replies), timeoutMs, `declaring ${this.streams.length} streams`);
  }

  /** Ends every stream at the daemon (used against a daemon we did not start, to leave it as found). */
  async closeAll(timeoutMs: number): Promise<void> {
    const replies = this.streams.map((s) => this.#request((ref) => ({ v: 1, type: 'close', ref, stream: s.declaration.name }), s));
    await withTimeout(Promise.all(replies), timeoutMs, `closing ${this.streams.length} streams`);
  }

  /**
   * Sends the next frame of `stream`, stamped with its scheduled time (performance.now() ms);
   * the result's latency is measured from that stamp, so a late send counts against latency.
   */
  send(stream: LoadStream, scheduledAt: number, wireFrames: Uint8Array[]): void {
    const connection = this.#connections[this.#connectionOf[stream.index]!]!;
    if (!connection.connected) {
      this.#fail(`frame of ${stream.declaration.name} not sent: its connection is down`);
      return;
    }
    const seq = this.#nextSeq[stream.index]!;
    this.#nextSeq[stream.index] = seq + 1;
    const bytes = packFrame(stream.declaration.name, seq, performance.timeOrigin + scheduledAt, wireFrames[seq % wireFrames.length]!);
    this.counts.sent++;
    connection.sendBytes(bytes).catch((err: Error) => this.#fail(`write failed: ${err.message}`));
  }

  async close(): Promise<void> {
    await Promise.all(this.#connections.map((c) => c.close()));
  }

  #request(build: (ref: string) => Message, stream: LoadStream): Promise<void> {
    const ref = `l${++this.#refCounter}`;
    const reply = new Promise<void>((resolve, reject) => this.#waiting.set(ref, { resolve, reject }));
    const connection = this.#connections[this.#connectionOf[stream.index]!]!;
    connection.send(build(ref)).catch((err: Error) => this.#settle(ref, err));
    return reply;
  }

  #settle(ref: string, err?: Error): void {
    const waiter = this.#waiting.get(ref);
    if (!waiter) return;
    this.#waiting.delete(ref);
    if (err) waiter.reject(err);
    else waiter.resolve();
  }

  #dispatch(msg: DaemonToProducer): void {
    switch (msg.type) {
      case 'declared':
      case 'closed':
        return this.#settle(msg.ref);
      case 'credit':
        this.creditsGranted += msg.grant;
        return;
      case 'ack':
        this.counts.ackedSolved += msg.solved;
        this.counts.ackedDropped += msg.dropped;
        return;
      case 'refused':
        this.counts.refused++;
        this.refusedByReason.set(msg.reason, (this.refusedByReason.get(msg.reason) ?? 0) + 1);
        return;
      case 'error': {
        const problem = `daemon error ${msg.code}${msg.stream ? ` on ${msg.stream}` : ''}: ${msg.detail}`;
        if (msg.ref && this.#waiting.has(msg.ref)) return this.#settle(msg.ref, new Error(problem));
        this.#fail(problem);
        return;
      }
    }
  }

  #fail(problem: string): void {
    this.failures.add(problem);
  }
}

/** Rejects with a message naming `what` when `promise` takes longer than `ms`. */
export async function withTimeout<T>(promise: Promise<T>, ms: number, what: string): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  const timeout = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new Error(`timed out after ${(ms / 1000).toFixed(0)} s ${what}`)), ms);
  });
  try {
    return await Promise.race([promise, timeout]);
  } finally {
    clearTimeout(timer);
  }
}
