import type { Logger } from 'pino';
import { DEFAULT_QUEUE, type StreamDeclaration as WireDeclaration } from '../protocol/index.js';
import { type FrameSubmission, type IngestVerdict, Pipeline } from '../pipeline/pipeline.js';
import { DeclarationError, checkDeclaration } from '../pipeline/streamSolver.js';
import type { PipelineEvent, StreamDeclaration } from '../pipeline/types.js';
import { AccessControl, mayAct, type Principal } from './access.js';
import type { DaemonConfig } from './config.js';
import { RequestError } from './connection.js';
import { DaemonMetrics } from './daemonMetrics.js';
import { FanOut } from './fanout.js';
import { DeclarationStore, type PersistedStream } from './persistence.js';
import type { ProducerSession } from './producerSession.js';
import type { SubscriberSession } from './subscriberSession.js';
import { TurnCorker } from './turnCorker.js';
import { WorkerError, WorkerPool } from './workerPool.js';

interface StreamRecord {
  declaration: StreamDeclaration;
  /** Canonical JSON of what must match for a re-declaration to re-attach. */
  identity: string;
  state: 'opening' | 'open' | 'closing';
  /** Resolves once the stream's operator is built and it is in the pipeline. */
  ready: Promise<void>;
  producer: ProducerSession | undefined;
}

/** How often the sequence numbers of active streams are saved (declarations are saved at once). */
const SAVE_INTERVAL_MS = 2000;

/**
 * The daemon's state and wiring, without the network: the stream registry, the pipeline and
 * its worker pool, fan-out to subscribers, metrics and persistence.
 */
export class DaemonCore {
  readonly metrics: DaemonMetrics;
  readonly access: AccessControl;
  readonly pool: WorkerPool;
  readonly pipeline: Pipeline;
  readonly fanout: FanOut;
  readonly producers = new Set<ProducerSession>();
  /** Every connection's writes of one event-loop turn leave in one system call. */
  readonly writes = new TurnCorker();
  private readonly streams = new Map<string, StreamRecord>();
  private readonly store: DeclarationStore | undefined;
  private readonly saveTimer: NodeJS.Timeout | undefined;
  private dirty = false;
  /** Producer sockets are paused because the queues hold too many bytes. */
  private ingestPaused = false;
  stopping = false;

  constructor(
    readonly config: DaemonConfig,
    readonly log: Logger,
  ) {
    this.access = new AccessControl(config.tokens);
    this.metrics = new DaemonMetrics({
      streams: () => this.streams.size,
      queuedFrames: () => this.pipeline.queuedFrames(),
      producerConnections: () => this.producers.size,
      subscriberConnections: () => this.fanout.subscribers.size,
      activeAlerts: () => this.pipeline.streamNames().reduce((n, s) => n + (this.pipeline.status(s)?.activeAlerts.length ?? 0), 0),
      workers: () => this.pool.size,
      queuedBytes: () => this.pipeline.queuedBytes(),
    });
    this.fanout = new FanOut(this.metrics, config.retainedResults);
    this.pool = new WorkerPool(config.workers, {
      onWorkerReplaced: (index, streams, reason) => {
        this.metrics.workersReplaced.inc();
        this.log.error({ worker: index, streams, reason }, 'solver worker died; replaced, its streams re-homed');
      },
      onRehomeFailed: (stream, err) => this.log.error({ stream, err }, 'could not re-open a stream after its worker died'),
    });
    this.pipeline = new Pipeline({
      backend: this.pool,
      wantsSignal: (stream) => this.wantsSignal(stream),
      onSolveError: (stream, seq, err) => this.log.warn({ stream, seq, err: (err as Error).message }, 'solve failed; frame dropped'),
    });
    this.pipeline.events.subscribe((e) => this.route(e));
    if (config.stateDir !== null) {
      this.store = new DeclarationStore(config.stateDir, () => this.snapshot());
      this.saveTimer = setInterval(() => {
        if (!this.dirty) return;
        this.dirty = false;
        this.save();
      }, SAVE_INTERVAL_MS);
      this.saveTimer.unref();
    }
  }

  /** Re-opens the streams saved by a previous run (not awaited: startup stays fast). */
  async restore(): Promise<number> {
    if (this.store === undefined) return 0;
    const saved = await this.store.load();
    for (const { declaration, next_seq } of saved) {
      const record = this.open(declaration, next_seq ?? undefined);
      record.ready.catch((err: Error) => {
        this.log.error({ stream: declaration.name, err: err.message }, 'could not restore a saved stream; forgetting it');
        this.save();
      });
    }
    if (saved.length > 0) this.log.info({ streams: saved.map((s) => s.declaration.name) }, 'restored declared streams');
    return saved.length;
  }

  /** Declares a stream for `producer`, or re-attaches it to an identical existing one. */
  async declare(producer: ProducerSession, wire: WireDeclaration): Promise<{ credits: number; nextSeq: number | null }> {
    const declaration = this.checkedDeclaration(wire);
    const name = declaration.name;
    let record = this.streams.get(name);
    if (record !== undefined) {
      if (record.state === 'closing') throw new RequestError('declaration_conflict', `stream "${name}" is closing; declare it again once it is closed`, 'stream');
      if (record.identity !== identityOf(declaration)) {
        throw new RequestError('declaration_conflict', `stream "${name}" exists with a different declaration; close it first`, 'stream');
      }
      await opened(record);
    } else {
      record = this.open(declaration, undefined);
      await opened(record);
      this.log.info({ stream: name, producer: producer.connectionId }, 'stream declared');
      this.fanout.publishStreamEvent(name, 'declared', declaration);
      await this.save();
    }
    if (record.producer !== undefined && record.producer !== producer) {
      record.producer.detach(name, `stream "${name}" was taken over by a newer connection`);
    }
    record.producer = producer;
    const status = this.pipeline.status(name)!;
    const busy = status.queueDepth + (status.solving ? 1 : 0);
    return { credits: Math.max(0, declaration.queue.capacity - busy), nextSeq: status.nextSeq ?? null };
  }

  /** The declaration with defaults filled in, checked; refuses while stopping. */
  protected checkedDeclaration(wire: WireDeclaration): StreamDeclaration {
    if (this.stopping) throw new RequestError('shutting_down', 'the daemon is shutting down');
    const declaration: StreamDeclaration = {
      ...wire,
      alerts: wire.alerts ?? [],
      queue: wire.queue ?? { ...DEFAULT_QUEUE },
    };
    try {
      checkDeclaration(declaration);
    } catch (err) {
      if (err instanceof DeclarationError) throw new RequestError('invalid_field', err.message, err.field);
      throw err;
    }
    return declaration;
  }

  /** A producer's frame: refused at once with a reason, or accepted (cluster mode answers once the frame is stored). */
  ingest(submission: FrameSubmission): IngestVerdict | Promise<IngestVerdict> {
    return this.pipeline.ingest(submission);
  }

  /** The highest seq through which every accepted frame of `stream` has finished (see Pipeline.doneThrough). */
  doneThrough(stream: string): number | undefined {
    return this.pipeline.doneThrough(stream);
  }

  /** Finishes the stream's accepted frames, then forgets it. */
  async closeStream(producer: ProducerSession, name: string): Promise<void> {
    const record = this.streams.get(name);
    if (record === undefined || record.producer !== producer) throw new RequestError('unknown_stream', `stream "${name}" is not declared on this connection`, 'stream');
    record.state = 'closing';
    await this.pipeline.closeStream(name);
    this.pool.close(name);
    this.streams.delete(name);
    this.fanout.publishStreamEvent(name, 'closed');
    this.log.info({ stream: name }, 'stream closed');
    await this.save();
  }

  /** A producer connection went away: its streams stay declared, without a producer. */
  releaseProducer(producer: ProducerSession): void {
    this.producers.delete(producer);
    for (const record of this.streams.values()) if (record.producer === producer) record.producer = undefined;
  }

  /** Declarations of the streams `sub` follows, in declaration order. */
  declarationsFollowedBy(sub: SubscriberSession): StreamDeclaration[] {
    return [...this.streams.values()].filter((r) => r.state !== 'opening' && sub.follows(r.declaration.name)).map((r) => r.declaration);
  }

  lastAcceptedSeq(stream: string): number | undefined {
    const next = this.pipeline.status(stream)?.nextSeq;
    return next === undefined ? undefined : next - 1;
  }

  /** A frame entered a queue: remember to save its stream's sequence number, and bound memory. */
  frameAccepted(): void {
    this.dirty = true;
    if (!this.ingestPaused && this.pipeline.queuedBytes() > this.config.limits.maxQueuedBytes) {
      this.ingestPaused = true;
      this.metrics.ingestPauses.inc();
      this.log.warn({ queuedBytes: this.pipeline.queuedBytes() }, 'queues full: reading from producers paused');
      for (const p of this.producers) p.ws.pause();
    }
  }

  /** Producers connecting while reading is paused start paused too. */
  get ingestIsPaused(): boolean {
    return this.ingestPaused;
  }

  private maybeResumeIngest(): void {
    if (!this.ingestPaused || this.pipeline.queuedBytes() > this.config.limits.maxQueuedBytes / 2) return;
    this.ingestPaused = false;
    this.log.info('queues drained: reading from producers resumed');
    for (const p of this.producers) p.ws.resume();
  }

  /** The JSON of GET /v1/streams: streams `principal` may watch (all without one). */
  describeStreams(principal?: Principal): object[] {
    const workers = this.pool.assignments();
    return [...this.streams.values()]
      .filter((r) => principal === undefined || mayAct(principal, 'watch', r.declaration.name))
      .map((r) => {
        const name = r.declaration.name;
        const st = this.pipeline.status(name);
        return {
          name,
          state: r.state,
          producer_connected: r.producer !== undefined,
          worker: workers.get(name) ?? null,
          ...(st
            ? {
                rows: st.shape.rows,
                cols: st.shape.cols,
                next_seq: st.nextSeq ?? null,
                queue_depth: st.queueDepth,
                solving: st.solving,
                frames: st.counts,
                alerts_active: st.activeAlerts,
                last_result: st.last
                  ? {
                      seq: st.last.seq,
                      solved_at: st.last.solvedAt,
                      flags: st.last.flags,
                      relative_residual: st.last.relativeResidual,
                      iterations: st.last.iterations,
                      solve_ms: st.last.solveMs,
                    }
                  : null,
              }
            : {}),
          declaration: r.declaration,
        };
      });
  }

  /** Stop taking frames, finish accepted ones (within the grace period), save state. */
  async drain(): Promise<void> {
    this.stopping = true;
    await this.pipeline.drainAll(this.config.shutdownGraceMs);
    for (const p of this.producers) p.flushAcks();
    if (this.saveTimer) clearInterval(this.saveTimer);
    await this.save();
  }

  async destroy(): Promise<void> {
    await this.pool.destroy();
    await this.pipeline.whenIdle();
  }

  private open(declaration: StreamDeclaration, nextSeq: number | undefined): StreamRecord {
    const name = declaration.name;
    const record: StreamRecord = { declaration, identity: identityOf(declaration), state: 'opening', ready: Promise.resolve(), producer: undefined };
    record.ready = this.pool.open(name, declaration).then((shape) => {
      this.pipeline.addStream(declaration, shape, nextSeq);
      record.state = 'open';
    });
    record.ready.catch(() => {
      if (this.streams.get(name) === record) this.streams.delete(name);
    });
    this.streams.set(name, record);
    return record;
  }

  /** Whether some subscriber wants the reconstructed signal of `stream` (computed only then). */
  protected wantsSignal(stream: string): boolean {
    return this.fanout.wantsSignal(stream);
  }

  /** Where the pipeline's events go: subscribers first (someone waits for them), then metrics, logs and producers. */
  protected route(e: PipelineEvent): void {
    switch (e.kind) {
      case 'result': {
        const r = e.result;
        this.fanout.publishResult(r);
        this.count(e);
        this.streams.get(r.stream)?.producer?.noteFinished(r.stream, r.seq, 'solved');
        this.maybeResumeIngest();
        return;
      }
      case 'dropped':
        this.count(e);
        this.streams.get(e.stream)?.producer?.noteFinished(e.stream, e.seq, 'dropped');
        this.maybeResumeIngest();
        return;
      case 'missed':
        this.fanout.publishMissed(e.missed);
        return;
      case 'alert':
        this.fanout.publishAlert(e.alert);
        this.count(e);
        return;
      case 'stream_closed':
        return;
    }
  }

  /** Metrics and log lines of a pipeline event (wherever its subscribers are). */
  protected count(e: PipelineEvent): void {
    switch (e.kind) {
      case 'result':
        this.metrics.framesSolved.inc();
        this.metrics.solveSeconds.observe(e.result.evidence.solve_ms / 1000);
        this.metrics.latencySeconds.observe(e.result.latencySeconds);
        return;
      case 'dropped':
        this.metrics.framesDropped.inc({ reason: e.reason });
        return;
      case 'alert': {
        const a = e.alert;
        (a.state === 'raised' ? this.metrics.alertsRaised : this.metrics.alertsCleared).inc({ metric: a.rule.metric });
        this.log.warn({ stream: a.stream, seq: a.seq, rule: a.ruleIndex, metric: a.rule.metric, value: a.value, limit: a.limit }, `alert ${a.state}`);
        return;
      }
      default:
        return;
    }
  }

  private snapshot(): PersistedStream[] {
    return [...this.streams.values()]
      .filter((r) => r.state !== 'closing')
      .map((r) => ({ declaration: r.declaration, next_seq: this.pipeline.status(r.declaration.name)?.nextSeq ?? null }));
  }

  private save(): Promise<void> {
    if (this.store === undefined) return Promise.resolve();
    return this.store.save().catch((err: Error) => this.log.error({ err: err.message }, 'could not save stream declarations'));
  }
}

/** Waits until the stream's operator is built; a failure is the declaration's fault. */
async function opened(record: StreamRecord): Promise<void> {
  try {
    await record.ready;
  } catch (err) {
    throw buildFailure(err);
  }
}

/** Why a declared stream's operator could not be built, as the producer is told. */
export function buildFailure(err: unknown): RequestError {
  if (err instanceof WorkerError && err.field) return new RequestError('invalid_field', err.message, err.field);
  return new RequestError('invalid_field', `stream.operator: the operator could not be built: ${(err as Error).message}`, 'stream.operator');
}

/** Canonical JSON (sorted keys) of the fields a re-declaration must repeat exactly. */
export function identityOf(d: StreamDeclaration): string {
  return canonicalJson({ operator: d.operator, solver: d.solver, alerts: d.alerts, queue: d.queue, noise_sigma: d.noise_sigma ?? null });
}

function canonicalJson(v: unknown): string {
  if (Array.isArray(v)) return `[${v.map(canonicalJson).join(',')}]`;
  if (v !== null && typeof v === 'object') {
    const entries = Object.entries(v as Record<string, unknown>)
      .filter(([, x]) => x !== undefined)
      .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
    return `{${entries.map(([k, x]) => `${JSON.stringify(k)}:${canonicalJson(x)}`).join(',')}}`;
  }
  return JSON.stringify(v);
}
