import { EMPTY, Observable, Subject, exhaustMap, filter, groupBy, mergeMap } from 'rxjs';
import { StreamAlerts, alertValues } from './alerts.js';
import { FrameQueue } from './frameQueue.js';
import { SequenceTracker } from './ordering.js';
import { assessQuality } from './quality.js';
import type {
  AlertEvent,
  DropReason,
  MissedRange,
  PipelineEvent,
  PublishedResult,
  RefusalReason,
  SolveBackend,
  StreamDeclaration,
  StreamShape,
} from './types.js';
import { checkFrameData } from './validateFrame.js';

/**
 * The per-stream pipeline: validate → order → bounded queue → solve → assess quality → alert
 * rules → events for fan-out.
 *
 * Validation, ordering and the queue policy run synchronously in `ingest`, so a producer learns
 * at once why a frame was refused. Accepted frames wait in the stream's bounded queue; each
 * arrival "kicks" the stream, and an RxJS graph turns kicks into one drain loop per stream
 * (`groupBy(stream)` → `mergeMap` without a concurrency limit → `exhaustMap(drain)`): the loop
 * solves the stream's frames one at a time, in order, until the queue is empty. Streams drain
 * in parallel; global concurrency is bounded by the solve backend (the worker pool).
 *
 * Nothing vanishes: every submitted frame is refused (returned verdict), dropped (a `dropped`
 * event at once, and a `missed` range announced in sequence order before the next result), or
 * solved and published (a `result` event).
 */

export interface FrameSubmission {
  stream: string;
  seq: number;
  time: number;
  /** Raw measurement bytes as received (Float64 LE, re/im interleaved); copied on acceptance. */
  yBytes: Uint8Array;
  sigma?: number;
  /** performance.now() at receipt. */
  receivedAt: number;
}

export type IngestVerdict =
  | { accepted: true }
  | { accepted: false; reason: RefusalReason; detail: string; field?: string };

export interface PipelineOptions {
  backend: SolveBackend;
  /** Whether any subscriber of the stream wants the reconstructed signal (asked per frame). */
  wantsSignal?: (stream: string) => boolean;
  /** Told about every failed solve (the frame itself is dropped and announced). */
  onSolveError?: (stream: string, seq: number, error: unknown) => void;
}

export interface StreamCounts {
  received: number;
  refused: number;
  dropped: number;
  solved: number;
}

export interface StreamStatus {
  declaration: StreamDeclaration;
  shape: StreamShape;
  nextSeq: number | undefined;
  queueDepth: number;
  solving: boolean;
  closing: boolean;
  counts: StreamCounts;
  activeAlerts: number[];
  last?: { seq: number; solvedAt: number; flags: string[]; relativeResidual: number; iterations: number; solveMs: number };
}

interface QueuedFrame {
  seq: number;
  time: number;
  y: Float64Array;
  /** The frame's own noise level, if it sent one... */
  ownSigma: number | undefined;
  /** ...else the declared one. */
  sigma: number | undefined;
  /** Sequence numbers missing right before this frame. */
  gap: number;
  receivedAt: number;
}

class StreamEntry {
  readonly order: SequenceTracker;
  readonly queue: FrameQueue<QueuedFrame>;
  readonly alerts: StreamAlerts;
  readonly counts: StreamCounts = { received: 0, refused: 0, dropped: 0, solved: 0 };
  /** True while a drain loop runs for this stream. */
  busy = false;
  inFlight: QueuedFrame | undefined;
  closing = false;
  /** Drops not yet flagged on a result (frames_dropped_before), below the frame in flight... */
  droppedSinceResult = 0;
  /** ...and above it: they precede the result after the one being solved. */
  droppedBehindInFlight = 0;
  /** Drops not yet announced to subscribers, in sequence order. */
  missed: MissedRange[] = [];
  last: StreamStatus['last'];
  readonly closeWaiters: Array<() => void> = [];

  constructor(
    readonly declaration: StreamDeclaration,
    readonly shape: StreamShape,
    nextSeq: number | undefined,
  ) {
    this.order = new SequenceTracker(nextSeq);
    this.queue = new FrameQueue(declaration.queue);
    this.alerts = new StreamAlerts(declaration.name, declaration.alerts);
  }

  get idle(): boolean {
    return !this.busy && this.queue.length === 0;
  }
}

export class Pipeline {
  /** Hot: results, alerts, drop notices and stream closures, in per-stream order. */
  readonly events: Observable<PipelineEvent>;
  private readonly out = new Subject<PipelineEvent>();
  private readonly kicks = new Subject<string>();
  private readonly ended = new Subject<string>();
  private readonly streams = new Map<string, StreamEntry>();
  private readonly idleWaiters: Array<() => void> = [];
  private accepting = true;
  /** Measurement bytes held by frames waiting in queues (what a flood of frames costs in memory). */
  private waitingBytes = 0;

  constructor(private readonly options: PipelineOptions) {
    this.events = this.out.asObservable();
    this.kicks
      .pipe(
        groupBy((name) => name, { duration: (group) => this.ended.pipe(filter((name) => name === group.key)) }),
        // No concurrency limit here: a capped outer mergeMap would starve later streams.
        mergeMap((group) => group.pipe(exhaustMap(() => this.drain(group.key)))),
      )
      .subscribe((event) => this.out.next(event));
  }

  has(stream: string): boolean {
    return this.streams.has(stream);
  }

  addStream(declaration: StreamDeclaration, shape: StreamShape, nextSeq?: number): void {
    if (this.streams.has(declaration.name)) throw new Error(`stream "${declaration.name}" is already in the pipeline`);
    this.streams.set(declaration.name, new StreamEntry(declaration, shape, nextSeq));
  }

  ingest(submission: FrameSubmission): IngestVerdict {
    const entry = this.streams.get(submission.stream);
    if (entry === undefined) {
      return { accepted: false, reason: 'unknown_stream', field: 'stream', detail: `no stream named "${submission.stream}" is declared` };
    }
    entry.counts.received++;
    const verdict = this.admit(entry, submission);
    if (!verdict.accepted) entry.counts.refused++;
    return verdict;
  }

  private admit(entry: StreamEntry, s: FrameSubmission): IngestVerdict {
    if (!this.accepting) return { accepted: false, reason: 'shutting_down', detail: 'the daemon is shutting down' };
    if (entry.closing) return { accepted: false, reason: 'stream_closing', detail: `stream "${s.stream}" is closing` };
    const check = checkFrameData(s.yBytes, entry.shape.rows, s.sigma);
    if (!check.ok) return { accepted: false, reason: check.reason, field: check.field, detail: check.detail };
    const order = entry.order.judge(s.seq);
    if (order.kind === 'late') {
      return { accepted: false, reason: 'out_of_order', field: 'seq', detail: `seq ${s.seq} arrived after later frames; frames are solved in order` };
    }
    if (order.kind === 'duplicate') {
      return { accepted: false, reason: 'duplicate', field: 'seq', detail: `seq ${s.seq} was already received` };
    }
    const frame: QueuedFrame = {
      seq: s.seq,
      time: s.time,
      y: check.y,
      ownSigma: s.sigma,
      sigma: s.sigma ?? entry.declaration.noise_sigma,
      gap: order.kind === 'gap' ? order.missing : 0,
      receivedAt: s.receivedAt,
    };
    const offer = entry.queue.offer(frame);
    if (!offer.accepted) {
      return {
        accepted: false,
        reason: 'queue_full',
        detail: `the queue of "${s.stream}" holds ${entry.declaration.queue.capacity} frames waiting; wait for credit`,
      };
    }
    entry.order.accept(s.seq);
    this.waitingBytes += frame.y.byteLength;
    for (const displaced of offer.displaced) {
      this.waitingBytes -= displaced.y.byteLength;
      this.drop(entry, displaced.seq, 'dropped_by_queue');
    }
    this.kicks.next(s.stream);
    return { accepted: true };
  }

  /** Stop taking frames of this stream, finish the ones accepted, then remove it. */
  closeStream(stream: string): Promise<void> {
    const entry = this.streams.get(stream);
    if (entry === undefined) return Promise.resolve();
    entry.closing = true;
    const closed = new Promise<void>((resolve) => entry.closeWaiters.push(resolve));
    if (entry.idle) this.finishClose(entry);
    return closed;
  }

  /**
   * Graceful stop: refuse new frames, let accepted ones finish for up to `graceMs`, then drop
   * whatever still waits (announced, reason `shutdown`) and wait for the frames being solved.
   */
  async drainAll(graceMs: number): Promise<void> {
    this.accepting = false;
    let timer: NodeJS.Timeout | undefined;
    const timedOut = new Promise<'timeout'>((resolve) => (timer = setTimeout(() => resolve('timeout'), graceMs)));
    const outcome = await Promise.race([this.whenIdle(), timedOut]);
    clearTimeout(timer);
    if (outcome === 'timeout') {
      for (const entry of this.streams.values()) {
        for (const frame of entry.queue.takeAll()) {
          this.waitingBytes -= frame.y.byteLength;
          this.drop(entry, frame.seq, 'shutdown');
        }
      }
    }
  }

  /** Resolves once no stream has work queued or being solved. */
  whenIdle(): Promise<void> {
    if ([...this.streams.values()].every((e) => e.idle)) return Promise.resolve();
    return new Promise((resolve) => this.idleWaiters.push(resolve));
  }

  status(stream: string): StreamStatus | undefined {
    const e = this.streams.get(stream);
    if (e === undefined) return undefined;
    return {
      declaration: e.declaration,
      shape: e.shape,
      nextSeq: e.order.nextSeq,
      queueDepth: e.queue.length,
      solving: e.inFlight !== undefined,
      closing: e.closing,
      counts: { ...e.counts },
      activeAlerts: e.alerts.activeRules(),
      ...(e.last ? { last: e.last } : {}),
    };
  }

  /**
   * The highest sequence number such that every accepted frame up to it has finished (solved or
   * dropped); undefined when there is none.
   */
  doneThrough(stream: string): number | undefined {
    const e = this.streams.get(stream);
    const next = e?.order.nextSeq;
    if (e === undefined || next === undefined) return undefined;
    const through = (e.inFlight?.seq ?? e.queue.peek()?.seq ?? next) - 1;
    return through >= 0 ? through : undefined;
  }

  streamNames(): string[] {
    return [...this.streams.keys()];
  }

  /** Measurement bytes of the frames waiting in all queues. */
  queuedBytes(): number {
    return this.waitingBytes;
  }

  queuedFrames(): number {
    let n = 0;
    for (const e of this.streams.values()) n += e.queue.length;
    return n;
  }

  private drain(stream: string): Observable<PipelineEvent> {
    const entry = this.streams.get(stream);
    if (entry === undefined) return EMPTY;
    // One frame in flight per stream: the loop takes the next frame only after a solve ends. A
    // plain loop inside one Observable per drain, not operators per frame: this is the hot path.
    return new Observable<PipelineEvent>((subscriber) => {
      entry.busy = true;
      const run = async () => {
        for (let frame = entry.queue.shift(); frame !== undefined; frame = entry.queue.shift()) {
          this.waitingBytes -= frame.y.byteLength;
          for (const event of await this.solveOne(entry, frame)) subscriber.next(event);
        }
        for (const event of this.settle(entry)) subscriber.next(event);
        subscriber.complete();
      };
      run().catch((err: unknown) => subscriber.error(err));
    });
  }

  private async solveOne(entry: StreamEntry, frame: QueuedFrame): Promise<PipelineEvent[]> {
    const stream = entry.declaration.name;
    entry.inFlight = frame;
    try {
      const out = await this.options.backend.solve({
        stream,
        seq: frame.seq,
        y: frame.y,
        ...(frame.sigma !== undefined ? { sigma: frame.sigma } : {}),
        wantSignal: this.options.wantsSignal?.(stream) ?? false,
      });
      const droppedBefore = entry.droppedSinceResult;
      entry.droppedSinceResult = 0;
      const flags = assessQuality(out, { rows: entry.shape.rows, sigma: frame.sigma, gap: frame.gap, droppedBefore });
      const result: PublishedResult = {
        stream,
        seq: frame.seq,
        time: frame.time,
        solvedAt: Date.now(),
        flags,
        evidence: out.evidence,
        indices: out.indices,
        values: out.values,
        ...(out.signal ? { signal: out.signal } : {}),
        y: out.y,
        ...(frame.ownSigma !== undefined ? { sigma: frame.ownSigma } : {}),
        latencySeconds: (performance.now() - frame.receivedAt) / 1000,
      };
      entry.counts.solved++;
      entry.last = {
        seq: frame.seq,
        solvedAt: result.solvedAt,
        flags,
        relativeResidual: out.evidence.relative_residual,
        iterations: out.evidence.iterations,
        solveMs: out.evidence.solve_ms,
      };
      const alerts: AlertEvent[] = entry.alerts.observe(frame.seq, alertValues(out.evidence, frame.gap + droppedBefore));
      return [
        ...this.takeMissed(entry, frame.seq),
        { kind: 'result', result },
        ...alerts.map((alert): PipelineEvent => ({ kind: 'alert', alert })),
      ];
    } catch (error) {
      this.options.onSolveError?.(stream, frame.seq, error);
      this.drop(entry, frame.seq, 'solver_failed');
      return [];
    } finally {
      entry.inFlight = undefined;
      entry.droppedSinceResult += entry.droppedBehindInFlight;
      entry.droppedBehindInFlight = 0;
    }
  }

  /** The drain loop found the queue empty: announce remaining drops, finish a close, wake waiters. */
  private settle(entry: StreamEntry): PipelineEvent[] {
    entry.busy = false;
    const events = this.takeMissed(entry, Infinity);
    if (entry.closing) {
      // Emitted after this drain's events: finishClose runs once they are out.
      queueMicrotask(() => this.finishClose(entry));
    }
    if (this.idleWaiters.length > 0 && [...this.streams.values()].every((e) => e.idle)) {
      for (const wake of this.idleWaiters.splice(0)) queueMicrotask(wake);
    }
    return events;
  }

  private finishClose(entry: StreamEntry): void {
    const stream = entry.declaration.name;
    if (this.streams.get(stream) !== entry || !entry.idle) return;
    for (const m of this.takeMissed(entry, Infinity)) this.out.next(m);
    this.streams.delete(stream);
    this.ended.next(stream);
    this.out.next({ kind: 'stream_closed', stream });
    for (const resolve of entry.closeWaiters.splice(0)) resolve();
  }

  private drop(entry: StreamEntry, seq: number, reason: DropReason): void {
    entry.counts.dropped++;
    if (entry.inFlight !== undefined && seq > entry.inFlight.seq) entry.droppedBehindInFlight++;
    else entry.droppedSinceResult++;
    const last = entry.missed[entry.missed.length - 1];
    // Extend the last range only if no frame between its end and `seq` may still be published.
    const inFlightBetween = entry.inFlight !== undefined && last !== undefined && entry.inFlight.seq > last.toSeq && entry.inFlight.seq < seq;
    if (last !== undefined && last.reason === reason && seq > last.toSeq && !inFlightBetween) {
      last.toSeq = seq;
      last.count++;
    } else {
      entry.missed.push({ stream: entry.declaration.name, fromSeq: seq, toSeq: seq, count: 1, reason });
    }
    this.out.next({ kind: 'dropped', stream: entry.declaration.name, seq, reason });
  }

  /** Drop notices for sequence numbers below `beforeSeq`, oldest first. */
  private takeMissed(entry: StreamEntry, beforeSeq: number): PipelineEvent[] {
    const due: PipelineEvent[] = [];
    while (entry.missed.length > 0 && entry.missed[0]!.toSeq < beforeSeq) {
      due.push({ kind: 'missed', missed: entry.missed.shift()! });
    }
    return due;
  }
}
