import {
  encode,
  float64ToBin,
  type AckMessage,
  type DaemonToProducer,
  type DeclaredMessage,
  type ErrorMessage,
  type Message,
  type ProtocolError,
  type RefusedMessage,
  type StreamDeclaration,
} from '../protocol/index.js';
import { ReconnectingConnection, type ConnectionOptions } from './connection.js';
import { TypedEmitter } from './emitter.js';
import { ConnectionLostError, DaemonError, RequestTracker } from './requests.js';

export type ProducerOptions = ConnectionOptions;

export interface FrameOptions {
  /** Sequence number; by default one more than the previous frame of the stream. */
  seq?: number;
  /** Acquisition time in ms since the epoch (default: now). */
  time?: number;
  /** Noise level of this frame. */
  sigma?: number;
}

export type DisconnectInfo = { code: number; reason: string; retryInMs: number | null; error?: Error };

export type ProducerEvents = {
  connected: [reconnect: boolean];
  disconnected: [info: DisconnectInfo];
  /** Each (re)declaration answered by the daemon. */
  declared: [msg: DeclaredMessage];
  ack: [msg: AckMessage];
  /**
   * A frame the daemon did not take. With `willResend` (the daemon was shutting down) the client
   * keeps it and sends it again after reconnecting; otherwise it is given up.
   */
  refused: [msg: RefusedMessage, willResend: boolean];
  /** An error the daemon reported that no request of ours was waiting for. */
  daemonError: [msg: ErrorMessage];
  /** A message from the daemon that did not decode (skipped; the connection stays up). */
  garbled: [err: ProtocolError];
};

interface OutgoingFrame {
  seq: number;
  bytes: Uint8Array;
  /** Settles the promise of `send`: resolved when first written, rejected if the producer stops first. */
  settle?: { resolve: () => void; reject: (err: Error) => void };
}

/** Refusals that say "not now" rather than "not this frame": the frame goes out again after a reconnect. */
const RESENDABLE_REFUSALS = new Set(['shutting_down']);

interface Waiter {
  resolve: () => void;
  reject: (err: Error) => void;
}

/**
 * One producer connection (`/v1/produce`). Declare streams on it, then send frames through the
 * returned ProducerStream. After a lost connection it reconnects with backoff, re-declares every
 * stream and resends the frames the daemon had not acknowledged, from the daemon's `next_seq` on.
 */
export class Producer extends TypedEmitter<ProducerEvents> {
  readonly #connection: ReconnectingConnection;
  readonly #streams = new Map<string, ProducerStream>();
  readonly #requests = new RequestTracker();
  #refCounter = 0;
  #stopped: Error | null = null;

  constructor(options: ProducerOptions) {
    super();
    this.#connection = new ReconnectingConnection(options, '/v1/produce');
    this.#connection.on('open', (reconnect) => {
      this.emit('connected', reconnect);
      if (!reconnect) return;
      for (const stream of this.#streams.values()) {
        stream.attach().catch((err: Error) => {
          if (err instanceof DaemonError) this.emit('daemonError', err.reply);
        });
      }
    });
    this.#connection.on('down', (info) => {
      this.#requests.failAll(new ConnectionLostError(`connection lost (${info.code} ${info.reason})`));
      if (info.retryInMs === null) {
        this.#stopped = info.error ?? new Error('producer closed');
        for (const stream of this.#streams.values()) stream.stop(this.#stopped);
      } else {
        for (const stream of this.#streams.values()) stream.detach();
      }
      this.emit('disconnected', info);
    });
    this.#connection.on('message', (msg) => this.#dispatch(msg as DaemonToProducer));
    this.#connection.on('garbled', (err) => this.emit('garbled', err));
  }

  get connected(): boolean {
    return this.#connection.connected;
  }

  /** Opens the connection. */
  connect(): Promise<void> {
    return this.#connection.start();
  }

  /** Declares a stream (or re-attaches to it) and resolves once the daemon has accepted it. */
  async declare(declaration: StreamDeclaration): Promise<ProducerStream> {
    if (this.#stopped) throw this.#stopped;
    if (this.#streams.has(declaration.name)) throw new Error(`stream ${declaration.name} is already declared on this producer`);
    const stream = new ProducerStream(this, declaration);
    this.#streams.set(declaration.name, stream);
    try {
      await stream.attach();
    } catch (err) {
      this.#streams.delete(declaration.name);
      throw err;
    }
    return stream;
  }

  /** The stream declared under `name` on this producer, if any. */
  stream(name: string): ProducerStream | undefined {
    return this.#streams.get(name);
  }

  /** Drops the socket as a network failure would (for fault drills); a reconnect follows. */
  interrupt(): void {
    this.#connection.interrupt();
  }

  /**
   * Closes cleanly: waits until every queued frame is written (with `drain`, also acknowledged;
   * with `closeStreams`, every stream is ended with `close`), then closes the socket. Streams
   * left open stay declared at the daemon, so a later producer can resume them.
   */
  async close(options: { drain?: boolean; closeStreams?: boolean } = {}): Promise<void> {
    if (!this.#stopped) {
      for (const stream of [...this.#streams.values()]) {
        if (options.closeStreams) await stream.close();
        else if (options.drain) await stream.drained();
        else await stream.flushed();
      }
    }
    await this.#connection.close();
  }

  /** @internal Sends a request and waits for its reply of type `accept`. */
  request<T extends DaemonToProducer>(build: (ref: string) => Message, accept: T['type']): Promise<T> {
    const ref = `p${++this.#refCounter}`;
    const reply = this.#requests.expect<T>(ref, accept);
    this.#connection.send(build(ref)).catch(() => this.#requests.fail(ref, new ConnectionLostError('not connected')));
    return reply;
  }

  /** @internal */
  write(bytes: Uint8Array): Promise<void> {
    return this.#connection.sendBytes(bytes);
  }

  /** @internal */
  get socketReady(): boolean {
    return this.#connection.connected;
  }

  /** @internal */
  forget(name: string): void {
    this.#streams.delete(name);
  }

  #dispatch(msg: DaemonToProducer): void {
    switch (msg.type) {
      case 'declared':
        this.#requests.settle(msg.ref, msg);
        this.emit('declared', msg);
        return;
      case 'closed':
        this.#requests.settle(msg.ref, msg);
        return;
      case 'credit':
        this.#streams.get(msg.stream)?.credit(msg.grant);
        return;
      case 'ack':
        this.#streams.get(msg.stream)?.acknowledged(msg.through_seq);
        this.emit('ack', msg);
        return;
      case 'refused': {
        const willResend = RESENDABLE_REFUSALS.has(msg.reason);
        if (!willResend) this.#streams.get(msg.stream)?.refused(msg.seq);
        this.emit('refused', msg, willResend);
        return;
      }
      case 'error':
        if (msg.ref && this.#requests.reject(msg.ref, msg)) return;
        this.emit('daemonError', msg);
        return;
    }
  }
}

/**
 * A declared stream. `send` queues a frame and resolves once it has been written to a socket;
 * while the daemon grants no credit, frames wait in order — the client never drops one. Frames
 * are retained until acknowledged, so they can be resent after a reconnect.
 */
export class ProducerStream {
  readonly name: string;
  /** Frames waiting for credit or a connection, in seq order. */
  readonly #pending: OutgoingFrame[] = [];
  /** Frames written but not yet acknowledged, in seq order. */
  #unacked: OutgoingFrame[] = [];
  #credits = 0;
  #nextSeq = 0;
  #attached = false;
  #closed = false;
  #stopped: Error | null = null;
  #idleWaiters: Array<Waiter & { until: 'flushed' | 'drained' }> = [];
  #attachWaiters: Waiter[] = [];

  constructor(
    private readonly producer: Producer,
    readonly declaration: StreamDeclaration,
  ) {
    this.name = declaration.name;
  }

  /** Frames the daemon currently allows in flight. */
  get credits(): number {
    return this.#credits;
  }

  /** The seq the next `send` without an explicit seq gets. */
  get nextSeq(): number {
    return this.#nextSeq;
  }

  /** Frames queued but not yet written. */
  get pendingCount(): number {
    return this.#pending.length;
  }

  /** Frames written but not yet acknowledged. */
  get unackedCount(): number {
    return this.#unacked.length;
  }

  /**
   * Queues one frame of measurements (interleaved complex, length 2·m) and resolves when it has
   * been written. The values are copied at once; the caller may reuse `y`.
   */
  send(y: Float64Array, options: FrameOptions = {}): Promise<void> {
    if (this.#stopped) return Promise.reject(this.#stopped);
    if (this.#closed) return Promise.reject(new Error(`stream ${this.name} is closed`));
    const seq = options.seq ?? this.#nextSeq;
    const last = this.#pending.at(-1)?.seq ?? this.#unacked.at(-1)?.seq;
    if (last !== undefined && seq <= last) {
      return Promise.reject(new Error(`seq ${seq} is not above the previous frame's ${last}`));
    }
    const bytes = encode({
      v: 1,
      type: 'frame',
      stream: this.name,
      seq,
      time: options.time ?? Date.now(),
      y: float64ToBin(y),
      ...(options.sigma !== undefined ? { sigma: options.sigma } : {}),
    });
    this.#nextSeq = seq + 1;
    return new Promise((resolve, reject) => {
      this.#pending.push({ seq, bytes, settle: { resolve, reject } });
      this.#pump();
    });
  }

  /** Resolves when every queued frame has been written. */
  flushed(): Promise<void> {
    return this.#waitFor('flushed');
  }

  /** Resolves when every queued frame has been written and acknowledged (solved or dropped). */
  drained(): Promise<void> {
    return this.#waitFor('drained');
  }

  /** Waits for the queued frames to be written, then ends the stream at the daemon. */
  async close(): Promise<void> {
    if (this.#closed) return;
    await this.flushed();
    this.#closed = true;
    for (;;) {
      try {
        await this.producer.request((ref) => ({ v: 1, type: 'close', ref, stream: this.name }), 'closed');
        break;
      } catch (err) {
        if (!(err instanceof ConnectionLostError)) throw err;
        await this.#attachedAgain();
      }
    }
    this.producer.forget(this.name);
  }

  // ---- driven by Producer

  /** @internal (Re)declares on the current socket; resolves once attached, rejects on a daemon error. */
  async attach(): Promise<void> {
    this.#attached = false;
    let reply: DeclaredMessage;
    try {
      reply = await this.producer.request<DeclaredMessage>(
        (ref) => ({ v: 1, type: 'declare', ref, stream: this.declaration }),
        'declared',
      );
    } catch (err) {
      // A lost connection is retried by the next reconnect; a daemon error is final.
      if (err instanceof ConnectionLostError) return this.#attachedAgain();
      if (err instanceof DaemonError) this.stop(err);
      throw err;
    }
    this.#resume(reply);
  }

  /** @internal */
  detach(): void {
    this.#attached = false;
  }

  /** @internal The producer stopped for good: fail everything still waiting. */
  stop(err: Error): void {
    this.#stopped = err;
    this.#attached = false;
    for (const frame of this.#pending) frame.settle?.reject(err);
    this.#pending.length = 0;
    for (const w of [...this.#idleWaiters, ...this.#attachWaiters]) w.reject(err);
    this.#idleWaiters = [];
    this.#attachWaiters = [];
  }

  /** @internal */
  credit(grant: number): void {
    this.#credits += grant;
    this.#pump();
  }

  /** @internal */
  acknowledged(throughSeq: number): void {
    let i = 0;
    while (i < this.#unacked.length && this.#unacked[i]!.seq <= throughSeq) i++;
    if (i > 0) this.#unacked = this.#unacked.slice(i);
    this.#wakeIdle();
  }

  /** @internal A refused frame will not be solved; stop retaining it. */
  refused(seq: number): void {
    this.#unacked = this.#unacked.filter((f) => f.seq !== seq);
    this.#wakeIdle();
  }

  #resume(reply: DeclaredMessage): void {
    const nextSeq = reply.next_seq;
    // Frames the daemon already has are done; the others go out again, ahead of the new ones.
    const resend = nextSeq === null ? this.#unacked : this.#unacked.filter((f) => f.seq >= nextSeq);
    this.#unacked = [];
    this.#pending.unshift(...resend);
    // A new producer for a stream the daemon knows continues its numbering.
    if (nextSeq !== null && this.#pending.length === 0 && nextSeq > this.#nextSeq) this.#nextSeq = nextSeq;
    this.#credits = reply.credits;
    this.#attached = true;
    for (const w of this.#attachWaiters) w.resolve();
    this.#attachWaiters = [];
    this.#pump();
  }

  #attachedAgain(): Promise<void> {
    if (this.#stopped) return Promise.reject(this.#stopped);
    return new Promise((resolve, reject) => this.#attachWaiters.push({ resolve, reject }));
  }

  #pump(): void {
    while (this.#attached && this.#credits > 0 && this.#pending.length > 0 && this.producer.socketReady) {
      const frame = this.#pending.shift()!;
      this.#credits--;
      this.#unacked.push(frame);
      const settle = frame.settle;
      frame.settle = undefined;
      // If the socket dies mid-write the frame stays retained and goes out again after resume.
      const done = () => {
        settle?.resolve();
        this.#wakeIdle();
      };
      this.producer.write(frame.bytes).then(done, done);
    }
    this.#wakeIdle();
  }

  #waitFor(until: 'flushed' | 'drained'): Promise<void> {
    if (this.#stopped) return Promise.reject(this.#stopped);
    return new Promise((resolve, reject) => {
      this.#idleWaiters.push({ until, resolve, reject });
      this.#wakeIdle();
    });
  }

  #wakeIdle(): void {
    if (this.#idleWaiters.length === 0) return;
    const flushed = this.#pending.length === 0;
    const drained = flushed && this.#unacked.length === 0;
    this.#idleWaiters = this.#idleWaiters.filter((w) => {
      const done = w.until === 'flushed' ? flushed : drained;
      if (done) w.resolve();
      return !done;
    });
  }
}
