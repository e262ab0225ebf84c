import { pack } from 'msgpackr';
import type { Msg, Subscription } from '@nats-io/transport-node';
import type { Logger } from 'pino';
import type { StreamDeclaration as WireDeclaration } from '../protocol/index.js';
import type { FrameSubmission, IngestVerdict } from '../pipeline/pipeline.js';
import type { PipelineEvent, StreamDeclaration, StreamShape } from '../pipeline/types.js';
import { checkFrameData } from '../pipeline/validateFrame.js';
import { mayAct, type Principal } from '../daemon/access.js';
import type { DaemonConfig } from '../daemon/config.js';
import { RequestError } from '../daemon/connection.js';
import { DaemonCore, buildFailure, identityOf } from '../daemon/core.js';
import type { ProducerSession } from '../daemon/producerSession.js';
import type { SubscriberSession } from '../daemon/subscriberSession.js';
import { DeclarationRegistry } from './declarationRegistry.js';
import { FrameOwner } from './frameOwner.js';
import { type ClusterNames, clusterNames, frameMessageId, frameSubject, outWildcard, partitionOf } from './names.js';
import { type ClusterSettings, type NatsHandles, openNats } from './natsResources.js';
import { decodeOutEvent, type OutEvent } from './outEvents.js';
import { PartitionLeases } from './partitionLeases.js';

/**
 * A cluster node: the daemon's core with the stream registry, the queues and the fan-out source
 * moved into NATS. As a gateway it takes producers' frames (checked, then stored in the frame
 * log) and fans out every result, alert and notice published on the out subjects to its own
 * subscribers, through the daemon's FanOut and outboxes. As an owner (FrameOwner) it solves the
 * partitions it holds a lease on, with the daemon's pipeline and worker pool.
 */
export class ClusterCore extends DaemonCore {
  readonly names: ClusterNames;
  private h: NatsHandles | undefined;
  private registry: DeclarationRegistry | undefined;
  private owner: FrameOwner | undefined;
  private leases: PartitionLeases | undefined;
  private outSub: Subscription | undefined;
  /** Producer connections of this node, per stream. */
  private readonly attached = new Map<string, ProducerSession>();
  /** Last seq of each stream this node's gateway has seen finished (result or drop notice). */
  private readonly delivered = new Map<string, number>();
  /** Last seq this node stored in the log, per stream (closing waits for it to finish). */
  private readonly lastStored = new Map<string, number>();
  private probeCounter = 0;

  constructor(
    config: DaemonConfig,
    log: Logger,
    readonly settings: ClusterSettings,
  ) {
    super(config, log);
    this.names = clusterNames(settings.prefix, settings.partitions);
  }

  /** Connects to NATS, mirrors the declarations, starts fanning out and taking partitions. */
  override async restore(): Promise<number> {
    const h = (this.h = await openNats(this.names, this.settings));
    this.registry = new DeclarationRegistry(
      h.declarations,
      {
        declared: (r) => this.fanout.publishStreamEvent(r.declaration.name, 'declared', r.declaration),
        closed: (stream) => {
          this.fanout.publishStreamEvent(stream, 'closed');
          this.delivered.delete(stream);
          this.owner?.streamClosed(stream);
        },
      },
      (key, err) => this.log.error({ key, err: err.message }, 'unreadable record in the declarations bucket; ignored'),
    );
    await this.registry.start();
    this.outSub = h.nc.subscribe(outWildcard(this.names), { callback: (err, msg) => (err ? this.log.error({ err: err.message }, 'out subscription failed') : this.fromOwner(msg)) });
    this.owner = new FrameOwner({
      h,
      names: this.names,
      maxAckPending: this.settings.maxAckPending,
      pipeline: this.pipeline,
      pool: this.pool,
      registry: this.registry,
      delivered: (s) => this.delivered.get(s),
      log: this.log,
    });
    const owner = this.owner;
    this.leases = new PartitionLeases(
      h,
      this.settings,
      {
        acquired: (p) => owner.acquire(p),
        release: (p) => owner.release(p, this.config.shutdownGraceMs),
        lost: (p) => owner.lost(p),
      },
      this.log,
    );
    await this.leases.start();
    this.log.info({ node: this.settings.nodeId, partitions: this.leases.partitions(), streams: this.registry.all().length }, 'cluster node joined');
    return this.registry.all().length;
  }

  /** Partitions this node owns now. */
  ownedPartitions(): number[] {
    return this.leases?.partitions() ?? [];
  }

  override async declare(producer: ProducerSession, wire: WireDeclaration): Promise<{ credits: number; nextSeq: number | null }> {
    const declaration = this.checkedDeclaration(wire);
    const registry = this.registry!;
    const name = declaration.name;
    let record = registry.get(name) ?? (await registry.fetch(name));
    if (record === undefined) {
      const candidate = { declaration, shape: await this.measureShape(declaration) };
      if (await registry.create(candidate)) {
        record = candidate;
        this.log.info({ stream: name, producer: producer.connectionId }, 'stream declared in the cluster');
      } else {
        record = await registry.fetch(name);
      }
    }
    if (record === undefined || identityOf(record.declaration) !== identityOf(declaration)) {
      throw new RequestError('declaration_conflict', `stream "${name}" exists with a different declaration; close it first`, 'stream');
    }
    const previous = this.attached.get(name);
    if (previous !== undefined && previous !== producer) previous.detach(name, `stream "${name}" was taken over by a newer connection`);
    this.attached.set(name, producer);
    const done = this.delivered.get(name);
    return { credits: declaration.queue.capacity, nextSeq: done === undefined ? null : done + 1 };
  }

  /** Checks a frame here (known stream, length, finite values), then stores it in the frame log. */
  override ingest(s: FrameSubmission): IngestVerdict | Promise<IngestVerdict> {
    if (this.stopping) return { accepted: false, reason: 'shutting_down', detail: 'this node is shutting down; send to another node' };
    const record = this.registry?.get(s.stream);
    if (record === undefined) return { accepted: false, reason: 'unknown_stream', field: 'stream', detail: `no stream named "${s.stream}" is declared` };
    const done = this.delivered.get(s.stream);
    if (done !== undefined && s.seq <= done) return { accepted: false, reason: 'duplicate', field: 'seq', detail: `seq ${s.seq} was already solved or reported` };
    const check = checkFrameData(s.yBytes, record.shape.rows, s.sigma);
    if (!check.ok) return { accepted: false, reason: check.reason, field: check.field, detail: check.detail };
    const frame = { v: 1, type: 'frame', stream: s.stream, seq: s.seq, time: s.time, y: s.yBytes, ...(s.sigma !== undefined ? { sigma: s.sigma } : {}) };
    this.lastStored.set(s.stream, Math.max(this.lastStored.get(s.stream) ?? -1, s.seq));
    return this.h!.js.publish(frameSubject(this.names, s.stream), pack(frame), { msgID: frameMessageId(s.stream, s.seq) }).then(
      (): IngestVerdict => ({ accepted: true }),
      (err: Error): IngestVerdict => ({ accepted: false, reason: 'queue_full', detail: `the cluster's frame log did not store it: ${err.message}` }),
    );
  }

  override doneThrough(stream: string): number | undefined {
    return this.delivered.get(stream);
  }

  /** Waits until the frames this node stored are finished (within the grace period), then deletes the declaration. */
  override async closeStream(producer: ProducerSession, name: string): Promise<void> {
    if (this.attached.get(name) !== producer) throw new RequestError('unknown_stream', `stream "${name}" is not declared on this connection`, 'stream');
    const deadline = Date.now() + this.config.shutdownGraceMs;
    while ((this.delivered.get(name) ?? -1) < (this.lastStored.get(name) ?? -1) && Date.now() < deadline) {
      await new Promise((resolve) => setTimeout(resolve, 20));
    }
    await this.registry!.remove(name);
    this.attached.delete(name);
    this.lastStored.delete(name);
    this.log.info({ stream: name }, 'stream closed in the cluster');
  }

  override releaseProducer(producer: ProducerSession): void {
    super.releaseProducer(producer);
    for (const [name, p] of this.attached) if (p === producer) this.attached.delete(name);
  }

  override declarationsFollowedBy(sub: SubscriberSession): StreamDeclaration[] {
    return (this.registry?.all() ?? []).filter((r) => sub.follows(r.declaration.name)).map((r) => r.declaration);
  }

  override lastAcceptedSeq(stream: string): number | undefined {
    return this.delivered.get(stream);
  }

  override describeStreams(principal?: Principal): object[] {
    return (this.registry?.all() ?? [])
      .filter((r) => principal === undefined || mayAct(principal, 'watch', r.declaration.name))
      .map((r) => {
        const name = r.declaration.name;
        const partition = partitionOf(name, this.names.partitions);
        const local = this.pipeline.status(name);
        const done = this.delivered.get(name);
        return {
          name,
          state: 'open',
          producer_connected: this.attached.has(name),
          partition,
          owned_here: this.owner?.owns(partition) ?? false,
          rows: r.shape.rows,
          cols: r.shape.cols,
          next_seq: done === undefined ? null : done + 1,
          ...(local ? { queue_depth: local.queueDepth, solving: local.solving, frames: local.counts, alerts_active: local.activeAlerts } : {}),
          declaration: r.declaration,
        };
      });
  }

  /** Hands every partition over (finishing frames taken, within the grace period), then flushes. */
  override async drain(): Promise<void> {
    this.stopping = true;
    await this.leases?.stop();
    for (const p of this.producers) p.flushAcks();
    await this.h?.nc.flush().catch(() => undefined);
  }

  override async destroy(): Promise<void> {
    this.registry?.stop();
    this.outSub?.unsubscribe();
    await this.h?.nc.close().catch(() => undefined);
    await super.destroy();
  }

  /** Every node computes results for subscribers anywhere, so the signal is always synthesised. */
  protected override wantsSignal(): boolean {
    return true;
  }

  /** Events of the partitions this node owns go to the cluster; subscribers get them back via fromOwner. */
  protected override route(e: PipelineEvent): void {
    this.count(e);
    this.owner?.handle(e);
  }

  /** An owner (maybe this node) published an event: fan it out here, once per seq. */
  private fromOwner(msg: Msg): void {
    let e: OutEvent;
    try {
      e = decodeOutEvent(msg.data);
    } catch (err) {
      this.log.warn({ subject: msg.subject, err: (err as Error).message }, 'ignored an unreadable message on an out subject');
      return;
    }
    switch (e.kind) {
      case 'result': {
        const r = e.result;
        if (r.seq <= (this.delivered.get(r.stream) ?? -1)) return; // a second owner's copy (after a handover)
        this.delivered.set(r.stream, r.seq);
        this.fanout.publishResult(r);
        this.attached.get(r.stream)?.noteFinished(r.stream, r.seq, 'solved');
        return;
      }
      case 'missed': {
        const m = e.missed;
        if (m.toSeq <= (this.delivered.get(m.stream) ?? -1)) return;
        this.delivered.set(m.stream, m.toSeq);
        this.fanout.publishMissed(m);
        const producer = this.attached.get(m.stream);
        for (let i = 0; i < m.count; i++) producer?.noteFinished(m.stream, m.toSeq, 'dropped');
        return;
      }
      case 'alert':
        this.fanout.publishAlert(e.alert);
        return;
      case 'refused': {
        this.attached.get(e.stream)?.refuse(e.stream, e.seq, e.reason as never, `refused by the stream's owner: ${e.detail}`);
        // Subscribers hear of a stored frame that will have no result.
        if (e.seq > (this.delivered.get(e.stream) ?? -1)) {
          this.fanout.publishMissed({ stream: e.stream, fromSeq: e.seq, toSeq: e.seq, count: 1, reason: e.reason });
        }
        return;
      }
    }
  }

  /** Builds the operator once on a worker to check the declaration and learn its shape. */
  private async measureShape(declaration: StreamDeclaration): Promise<StreamShape> {
    // '#' never occurs in stream names, so the probe cannot collide with a real stream.
    const probe = `#probe-${this.probeCounter++}`;
    try {
      return await this.pool.open(probe, declaration);
    } catch (err) {
      throw buildFailure(err);
    } finally {
      this.pool.close(probe);
    }
  }
}
