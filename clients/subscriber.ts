import {
  binToFloat64,
  sparseFromWire,
  type AlertMessage,
  type BehindPolicy,
  type DaemonToSubscriber,
  type ErrorMessage,
  type Evidence,
  type Message,
  type MissedMessage,
  type ProtocolError,
  type ResultMessage,
  type SparseVector,
  type StreamDeclaration,
  type StreamEventMessage,
  type SubscribedMessage,
  type Want,
  matchesStreamPattern,
} from '../protocol/index.js';
import { ReconnectingConnection, type ConnectionOptions } from './connection.js';
import { TypedEmitter } from './emitter.js';
import type { DisconnectInfo } from './producer.js';
import { ConnectionLostError, DaemonError, RequestTracker } from './requests.js';

export type SubscriberOptions = ConnectionOptions;

export interface SubscriptionRequest {
  /** A glob pattern or a list of names/patterns. */
  streams: string | string[];
  want: Want[];
  topK?: number;
  whenBehind: BehindPolicy;
}

/** A result with its binary payloads decoded into aligned typed arrays. */
export interface Result {
  stream: string;
  seq: number;
  time: number;
  solved_at: number;
  flags: string[];
  evidence: Evidence;
  coefficients?: SparseVector;
  top_k?: SparseVector;
  /** Interleaved complex. */
  signal?: Float64Array;
  /** The frame's measurements (interleaved complex), with want 'measurements'. */
  y?: Float64Array;
  /** The frame's own noise level, with want 'measurements'. */
  sigma?: number;
  /** The message as received (bins are views into the socket buffer). */
  raw: ResultMessage;
}

export type SubscriberEvents = {
  connected: [reconnect: boolean];
  disconnected: [info: DisconnectInfo];
  /** Each (re)subscription answered by the daemon, with the declarations of matching streams. */
  subscribed: [msg: SubscribedMessage];
  result: [result: Result];
  alert: [msg: AlertMessage];
  missed: [msg: MissedMessage];
  streamEvent: [msg: StreamEventMessage];
  daemonError: [msg: ErrorMessage];
  /** A message from the daemon that did not decode (skipped; the connection stays up). */
  garbled: [err: ProtocolError];
};

/** Decodes the binary payloads of a result message (copies them out of the socket buffer). */
export function decodeResult(msg: ResultMessage): Result {
  return {
    stream: msg.stream,
    seq: msg.seq,
    time: msg.time,
    solved_at: msg.solved_at,
    flags: msg.flags,
    evidence: msg.evidence,
    ...(msg.coefficients ? { coefficients: sparseFromWire(msg.coefficients, 'coefficients') } : {}),
    ...(msg.top_k ? { top_k: sparseFromWire(msg.top_k, 'top_k') } : {}),
    ...(msg.signal ? { signal: binToFloat64(msg.signal, 'signal') } : {}),
    ...(msg.y ? { y: binToFloat64(msg.y, 'y') } : {}),
    ...(msg.sigma !== undefined ? { sigma: msg.sigma } : {}),
    raw: msg,
  };
}

/** A subscription kept by the Subscriber and replayed after every reconnect. */
class Subscription {
  /** The daemon's id on the current socket. */
  id: string | null = null;
  constructor(readonly request: SubscriptionRequest) {}

  matches(stream: string): boolean {
    const patterns = Array.isArray(this.request.streams) ? this.request.streams : [this.request.streams];
    return patterns.some((p) => matchesStreamPattern(p, stream));
  }
}

/**
 * One subscriber connection (`/v1/watch`). Results, alerts, missed-range notices and stream
 * events arrive as typed events. After a lost connection it reconnects with backoff and
 * re-subscribes with `resume_after` (the last seq it saw per stream), and drops any result it has
 * already delivered, so listeners see each (stream, seq) once and in order.
 */
export class Subscriber extends TypedEmitter<SubscriberEvents> {
  readonly #connection: ReconnectingConnection;
  readonly #requests = new RequestTracker();
  readonly #subscriptions: Subscription[] = [];
  /** Last seq delivered per stream. */
  readonly #lastSeq = new Map<string, number>();
  /** Declarations of the streams seen, by name. */
  readonly #declarations = new Map<string, StreamDeclaration>();
  #refCounter = 0;
  #duplicates = 0;

  constructor(options: SubscriberOptions) {
    super();
    this.#connection = new ReconnectingConnection(options, '/v1/watch');
    this.#connection.on('open', (reconnect) => {
      this.emit('connected', reconnect);
      if (!reconnect) return;
      for (const sub of this.#subscriptions) {
        this.#subscribeOnSocket(sub).catch((err: Error) => {
          if (err instanceof DaemonError) this.emit('daemonError', err.reply);
        });
      }
    });
    this.#connection.on('down', (info) => {
      this.#requests.failAll(new ConnectionLostError(`connection lost (${info.code} ${info.reason})`));
      for (const sub of this.#subscriptions) sub.id = null;
      this.emit('disconnected', info);
    });
    this.#connection.on('message', (msg) => this.#dispatch(msg as DaemonToSubscriber));
    this.#connection.on('garbled', (err) => this.emit('garbled', err));
  }

  get connected(): boolean {
    return this.#connection.connected;
  }

  /** Results dropped because they had already been delivered (after a resume). */
  get duplicatesDropped(): number {
    return this.#duplicates;
  }

  /** The last seq delivered for `stream`, if any. */
  lastSeq(stream: string): number | undefined {
    return this.#lastSeq.get(stream);
  }

  /** Declarations of the streams this subscriber has heard of. */
  get declarations(): ReadonlyMap<string, StreamDeclaration> {
    return this.#declarations;
  }

  connect(): Promise<void> {
    return this.#connection.start();
  }

  /** Subscribes; resolves with the daemon's answer (including the matching declarations). */
  async subscribe(request: SubscriptionRequest): Promise<SubscribedMessage> {
    const sub = new Subscription(request);
    const reply = await this.#subscribeOnSocket(sub);
    this.#subscriptions.push(sub);
    return reply;
  }

  /** Drops the socket as a network failure would (for fault drills); a reconnect follows. */
  interrupt(): void {
    this.#connection.interrupt();
  }

  async close(): Promise<void> {
    await this.#connection.close();
  }

  async #subscribeOnSocket(sub: Subscription): Promise<SubscribedMessage> {
    const ref = `s${++this.#refCounter}`;
    const reply = this.#requests.expect<SubscribedMessage>(ref, 'subscribed');
    const resumeAfter: Record<string, number> = {};
    // Every stream heard of: its last delivered seq, or −1 if none of its results arrived yet.
    for (const stream of new Set([...this.#declarations.keys(), ...this.#lastSeq.keys()])) {
      if (sub.matches(stream)) resumeAfter[stream] = this.#lastSeq.get(stream) ?? -1;
    }
    const { streams, want, topK, whenBehind } = sub.request;
    const msg: Message = {
      v: 1,
      type: 'subscribe',
      ref,
      streams,
      want,
      when_behind: whenBehind,
      ...(topK !== undefined ? { top_k: topK } : {}),
      ...(Object.keys(resumeAfter).length > 0 ? { resume_after: resumeAfter } : {}),
    };
    this.#connection.send(msg).catch(() => this.#requests.fail(ref, new ConnectionLostError('not connected')));
    const answer = await reply;
    sub.id = answer.id;
    for (const declaration of answer.streams) this.#declarations.set(declaration.name, declaration as StreamDeclaration);
    this.emit('subscribed', answer);
    return answer;
  }

  #dispatch(msg: DaemonToSubscriber): void {
    switch (msg.type) {
      case 'subscribed':
        this.#requests.settle(msg.ref, msg);
        return;
      case 'unsubscribed':
        return;
      case 'result': {
        const last = this.#lastSeq.get(msg.stream);
        if (last !== undefined && msg.seq <= last) {
          this.#duplicates++;
          return;
        }
        this.#lastSeq.set(msg.stream, msg.seq);
        this.emit('result', decodeResult(msg));
        return;
      }
      case 'alert':
        this.emit('alert', msg);
        return;
      case 'missed':
        this.emit('missed', msg);
        return;
      case 'stream_event':
        if (msg.event === 'declared' && msg.declaration) this.#declarations.set(msg.stream, msg.declaration as StreamDeclaration);
        // A closed stream's numbering ends; a later stream of the same name starts afresh.
        if (msg.event === 'closed') this.#lastSeq.delete(msg.stream);
        this.emit('streamEvent', msg);
        return;
      case 'error':
        if (msg.ref && this.#requests.reject(msg.ref, msg)) return;
        this.emit('daemonError', msg);
        return;
    }
  }
}
