import type { JsMsg } from '@nats-io/jetstream';
import type { Logger } from 'pino';
import { decode, type FrameMessage } from '../protocol/index.js';
import type { Pipeline } from '../pipeline/pipeline.js';
import type { PipelineEvent } from '../pipeline/types.js';
import type { WorkerPool } from '../daemon/workerPool.js';
import type { DeclarationRegistry } from './declarationRegistry.js';
import { type ClusterNames, outSubject, partitionOf } from './names.js';
import type { NatsHandles } from './natsResources.js';
import { encodeOutEvent, type OutEvent } from './outEvents.js';
import { PartitionIntake } from './partitionIntake.js';

export interface FrameOwnerDeps {
  h: NatsHandles;
  names: ClusterNames;
  maxAckPending: number;
  pipeline: Pipeline;
  pool: WorkerPool;
  registry: DeclarationRegistry;
  /** The last seq of `stream` this node's gateway has seen finished (result or drop notice). */
  delivered: (stream: string) => number | undefined;
  log: Logger;
}

/**
 * The owner side of a node: takes the frames of the partitions it holds from the log, feeds
 * them to the daemon's own pipeline and worker pool (so ordering, queue policies, warm state and
 * quality flags are exactly the single-node ones), publishes what the pipeline produces on the
 * streams' out subjects, and acknowledges a frame to the log only once its result or drop
 * notice is published — so a frame is in the log until its fate is known to the cluster.
 */
export class FrameOwner {
  private readonly intakes = new Map<number, PartitionIntake>();
  /** Streams opened on this node's pool and pipeline (resolves false when unknown). */
  private readonly opened = new Map<string, Promise<boolean>>();
  /** Log messages of frames in the pipeline, by stream and seq, acknowledged once finished. */
  private readonly pending = new Map<string, Map<number, JsMsg>>();
  /** Last seq this node published a result or drop notice for, per stream. */
  private readonly published = new Map<string, number>();
  /** Streams being closed here; opening one again waits for that (the pipeline holds one entry per name). */
  private readonly closing = new Map<string, Promise<void>>();
  /** Partitions whose lease was lost: what their streams still produce here is not published. */
  private readonly fenced = new Set<number>();

  constructor(private readonly d: FrameOwnerDeps) {}

  owns(partition: number): boolean {
    return this.intakes.has(partition);
  }

  async acquire(partition: number): Promise<void> {
    this.fenced.delete(partition);
    const intake = new PartitionIntake(partition, (msg) => this.take(partition, msg), this.d.log);
    this.intakes.set(partition, intake);
    await intake.start(this.d.h, this.d.names, this.d.maxAckPending);
  }

  /** Stops taking the partition's frames and finishes those taken, for at most `graceMs`. */
  async release(partition: number, graceMs: number): Promise<void> {
    await this.intakes.get(partition)?.stop();
    this.intakes.delete(partition);
    await Promise.all(this.streamsOf(partition).map((s) => this.closeLocal(s, graceMs)));
  }

  /** Someone else holds the partition now: stop at once (results still in flight are deduplicated by seq downstream). */
  lost(partition: number): void {
    // Fenced: its frames belong to the new owner, which solves them again from the log.
    this.fenced.add(partition);
    void this.intakes.get(partition)?.stop();
    this.intakes.delete(partition);
    for (const s of this.streamsOf(partition)) void this.closeLocal(s, 0);
  }

  /** The stream's declaration was deleted (closed by its producer). */
  streamClosed(stream: string): void {
    void this.closeLocal(stream, Number.MAX_SAFE_INTEGER).then(() => this.published.delete(stream));
  }

  /** Publishes what the pipeline produced and acknowledges the frames whose fate is now known. */
  handle(e: PipelineEvent): void {
    if (e.kind !== 'dropped' && e.kind !== 'stream_closed' && this.fenced.size > 0) {
      const stream = e.kind === 'result' ? e.result.stream : e.kind === 'missed' ? e.missed.stream : e.alert.stream;
      if (this.fenced.has(partitionOf(stream, this.d.names.partitions))) return;
    }
    switch (e.kind) {
      case 'result':
        this.publish(e.result.stream, { kind: 'result', result: e.result });
        this.finished(e.result.stream, e.result.seq, e.result.seq);
        return;
      case 'missed':
        this.publish(e.missed.stream, { kind: 'missed', missed: e.missed });
        this.finished(e.missed.stream, e.missed.fromSeq, e.missed.toSeq);
        return;
      case 'alert':
        this.publish(e.alert.stream, { kind: 'alert', alert: e.alert });
        return;
      default:
        return;
    }
  }

  private async take(partition: number, msg: JsMsg): Promise<void> {
    let frame: FrameMessage;
    try {
      const m = decode(msg.data);
      if (m.type !== 'frame') throw new Error(`a "${m.type}" message`);
      frame = m;
    } catch (err) {
      this.d.log.warn({ partition, subject: msg.subject, err: (err as Error).message }, 'discarded a message on a frame subject that is not a valid frame');
      msg.term();
      return;
    }
    const { stream, seq } = frame;
    const refuse = (reason: string, detail: string) => {
      this.publish(stream, { kind: 'refused', stream, seq, reason, detail });
      msg.ack();
    };
    const home = partitionOf(stream, this.d.names.partitions);
    if (home !== partition) return refuse('invalid_field', `stream "${stream}" belongs to partition ${home}; it was published on partition ${partition}`);
    const done = this.lastDone(stream);
    if (done !== undefined && seq <= done) {
      // Its fate is already announced (a previous owner finished it but its ack was lost in the
      // handover): a repeat, not a new frame. Gateways refuse producers' own repeats on arrival.
      msg.ack();
      return;
    }
    const held = this.pending.get(stream);
    if (held?.has(seq)) {
      held.set(seq, msg); // redelivered while still in our pipeline: acknowledge the newest delivery
      return;
    }
    if (!(await this.ensureOpen(stream))) return refuse('unknown_stream', `no stream named "${stream}" is declared in the cluster`);
    const verdict = this.d.pipeline.ingest({
      stream,
      seq,
      time: frame.time,
      yBytes: frame.y,
      ...(frame.sigma !== undefined ? { sigma: frame.sigma } : {}),
      receivedAt: performance.now(),
    });
    if (!verdict.accepted && verdict.reason === 'duplicate') {
      // A second delivery of a frame this node already took (the log's duplicate window and the
      // gateways keep producers' own repeats out): its fate is, or will be, announced once.
      msg.ack();
      return;
    }
    if (!verdict.accepted) return refuse(verdict.reason, verdict.field ? `${verdict.field}: ${verdict.detail}` : verdict.detail);
    let map = this.pending.get(stream);
    if (map === undefined) this.pending.set(stream, (map = new Map()));
    map.set(seq, msg);
  }

  /** Opens the stream on this node (operator on a worker, entry in the pipeline), once. */
  private ensureOpen(stream: string): Promise<boolean> {
    let ready = this.opened.get(stream);
    if (ready === undefined) {
      ready = (async () => {
        await this.closing.get(stream);
        const record = this.d.registry.get(stream) ?? (await this.d.registry.fetch(stream));
        if (record === undefined) return false;
        const shape = await this.d.pool.open(stream, record.declaration);
        const done = this.lastDone(stream);
        // A stream taken over resumes after the last seq the cluster has seen finished; its
        // warm state starts cold (the first result is flagged cold_start).
        this.d.pipeline.addStream(record.declaration, shape, done === undefined ? undefined : done + 1);
        return true;
      })();
      this.opened.set(stream, ready);
      ready.then(
        (ok) => {
          if (!ok && this.opened.get(stream) === ready) this.opened.delete(stream);
        },
        (err: Error) => {
          this.d.log.error({ stream, err: err.message }, 'could not open a stream of an owned partition');
          if (this.opened.get(stream) === ready) this.opened.delete(stream);
        },
      );
    }
    return ready.catch(() => false);
  }

  /** Finishes the stream's frames in the pipeline (at most `graceMs`), then frees its worker state. */
  private closeLocal(stream: string, graceMs: number): Promise<void> {
    const ready = this.opened.get(stream);
    this.opened.delete(stream);
    if (ready === undefined) return Promise.resolve();
    const done = this.finishLocal(stream, ready, graceMs).finally(() => {
      if (this.closing.get(stream) === done) this.closing.delete(stream);
    });
    this.closing.set(stream, done);
    return done;
  }

  private async finishLocal(stream: string, ready: Promise<boolean>, graceMs: number): Promise<void> {
    if (!(await ready.catch(() => false))) return;
    let timer: NodeJS.Timeout | undefined;
    await Promise.race([this.d.pipeline.closeStream(stream), new Promise((resolve) => (timer = setTimeout(resolve, Math.min(graceMs, 2 ** 31 - 1))))]);
    clearTimeout(timer);
    this.d.pool.close(stream);
    // Frames not finished stay unacknowledged in the log: the partition's next owner takes them.
    this.pending.delete(stream);
    // Bounded: once its worker state is gone its remaining frames fail fast and the entry leaves.
    await this.d.pipeline.closeStream(stream);
  }

  private streamsOf(partition: number): string[] {
    return [...this.opened.keys()].filter((s) => partitionOf(s, this.d.names.partitions) === partition);
  }

  private lastDone(stream: string): number | undefined {
    const a = this.published.get(stream);
    const b = this.d.delivered(stream);
    return a === undefined ? b : b === undefined ? a : Math.max(a, b);
  }

  private finished(stream: string, fromSeq: number, toSeq: number): void {
    this.published.set(stream, Math.max(this.published.get(stream) ?? -1, toSeq));
    const held = this.pending.get(stream);
    if (held === undefined) return;
    if (fromSeq === toSeq) {
      held.get(fromSeq)?.ack();
      held.delete(fromSeq);
      return;
    }
    for (const [seq, msg] of held) {
      if (seq < fromSeq || seq > toSeq) continue;
      msg.ack();
      held.delete(seq);
    }
  }

  private publish(stream: string, e: OutEvent): void {
    this.d.h.nc.publish(outSubject(this.d.names, stream), encodeOutEvent(e));
  }
}
