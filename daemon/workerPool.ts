import { Worker } from 'node:worker_threads';
import type { SolveBackend, SolveOutput, SolveTask, StreamDeclaration, StreamShape } from '../pipeline/types.js';
import type { WorkerReply, WorkerRequest } from './workerProtocol.js';

/**
 * A fixed pool of solver worker threads with stream affinity: each stream is pinned to one
 * worker (the one with the fewest streams when it is opened), where its operator and warm state
 * live. The pipeline keeps at most one frame per stream in flight, so a worker's queue is at most
 * its number of streams. A frame's measurements are transferred, not copied.
 *
 * A worker that dies (uncaught error, out of memory, terminated) is replaced at once: its streams
 * are opened again on the least-loaded workers, and a frame it was solving is solved again there.
 * That frame, or the stream's next one, is solved cold (the warm state died with the worker) and
 * is flagged `cold_start`.
 */

const BOOTSTRAP = new URL('./workerBootstrap.mjs', import.meta.url);
const ENTRY = new URL('./solveWorker.ts', import.meta.url).href;

export class WorkerError extends Error {
  constructor(
    message: string,
    readonly field?: string,
  ) {
    super(message);
    this.name = 'WorkerError';
  }
}

/** The worker holding a request died before answering it. */
class WorkerStoppedError extends WorkerError {}

interface Pending {
  resolve: (reply: WorkerReply & { ok: true }) => void;
  reject: (err: Error) => void;
}

interface Slot {
  index: number;
  worker: Worker;
  pending: Map<number, Pending>;
  streams: Set<string>;
}

interface Placement {
  slot: Slot;
  declaration: StreamDeclaration;
  /** Resolves once the stream's operator is built on its current worker. */
  ready: Promise<StreamShape>;
}

export interface WorkerPoolEvents {
  /** A worker died and was replaced; `streams` were re-homed. */
  onWorkerReplaced?: (index: number, streams: string[], reason: string) => void;
  /** Re-opening a stream after its worker died failed. */
  onRehomeFailed?: (stream: string, error: Error) => void;
}

export class WorkerPool implements SolveBackend {
  private readonly slots: Slot[] = [];
  private readonly placements = new Map<string, Placement>();
  private nextId = 1;
  private stopping = false;

  constructor(
    size: number,
    private readonly events: WorkerPoolEvents = {},
  ) {
    for (let i = 0; i < size; i++) this.slots.push(this.spawn(i));
  }

  get size(): number {
    return this.slots.length;
  }

  /** Which worker each stream lives on. */
  assignments(): Map<string, number> {
    return new Map([...this.placements].map(([name, p]) => [name, p.slot.index]));
  }

  /** Pins the stream to the least-loaded worker and builds its operator there. */
  open(stream: string, declaration: StreamDeclaration): Promise<StreamShape> {
    if (this.placements.has(stream)) throw new Error(`stream "${stream}" is already open`);
    return this.place(stream, declaration).ready.catch((err: unknown) => {
      // The worker died while building the operator: the stream was already re-homed on its successor.
      const successor = this.placements.get(stream);
      if (err instanceof WorkerStoppedError && !this.stopping && successor !== undefined) return successor.ready;
      throw err;
    });
  }

  /**
   * Solves one frame on its stream's worker. If that worker dies meanwhile, the frame is solved
   * once more, cold, on the worker that took the stream over (y is transferred, so a copy is
   * kept for that); a frame that kills its second worker as well fails.
   */
  async solve(task: SolveTask): Promise<SolveOutput> {
    const spare = task.y.slice();
    try {
      return await this.solveOnce(task, task.y);
    } catch (err) {
      if (!(err instanceof WorkerStoppedError) || this.stopping) throw err;
      return await this.solveOnce(task, spare);
    }
  }

  private async solveOnce(task: SolveTask, y: Float64Array): Promise<SolveOutput> {
    const placement = this.placements.get(task.stream);
    if (placement === undefined) throw new WorkerError(`stream "${task.stream}" is not open`);
    await placement.ready;
    const { stream, seq, sigma, wantSignal } = task;
    const req: WorkerRequest = { type: 'solve', id: 0, stream, seq, y, wantSignal, ...(sigma !== undefined ? { sigma } : {}) };
    const reply = await this.request(placement.slot, req, [y.buffer as ArrayBuffer]);
    return (reply as { output: SolveOutput }).output;
  }

  /** Releases the stream's operator and warm state. */
  close(stream: string): void {
    const placement = this.placements.get(stream);
    if (placement === undefined) return;
    this.forget(stream);
    this.request(placement.slot, { type: 'close', id: 0, stream }).catch(() => undefined);
  }

  /** Kills one worker (it is replaced like a worker that crashed). */
  async terminateWorker(index: number): Promise<void> {
    const slot = this.slots[index];
    if (slot === undefined) throw new RangeError(`no worker ${index}`);
    await slot.worker.terminate();
  }

  /** Stops every worker; requests in flight fail. */
  async destroy(): Promise<void> {
    this.stopping = true;
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
  }

  private place(stream: string, declaration: StreamDeclaration): Placement {
    const slot = this.leastLoaded();
    slot.streams.add(stream);
    const ready = this.request(slot, { type: 'open', id: 0, stream, declaration }).then((r) => (r as { shape: StreamShape }).shape);
    const placement: Placement = { slot, declaration, ready };
    this.placements.set(stream, placement);
    ready.catch(() => {
      if (this.placements.get(stream) === placement) this.forget(stream);
    });
    return placement;
  }

  private forget(stream: string): void {
    const p = this.placements.get(stream);
    if (p === undefined) return;
    p.slot.streams.delete(stream);
    this.placements.delete(stream);
  }

  private leastLoaded(): Slot {
    let best = this.slots[0]!;
    for (const s of this.slots) if (s.streams.size < best.streams.size) best = s;
    return best;
  }

  private request(slot: Slot, req: WorkerRequest, transfer: ArrayBuffer[] = []): Promise<WorkerReply & { ok: true }> {
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      slot.pending.set(id, { resolve, reject });
      slot.worker.postMessage({ ...req, id }, transfer);
    });
  }

  private spawn(index: number): Slot {
    const worker = new Worker(BOOTSTRAP, { workerData: { entry: ENTRY } });
    const slot: Slot = { index, worker, pending: new Map(), streams: new Set() };
    worker.on('message', (reply: WorkerReply) => {
      const p = slot.pending.get(reply.id);
      if (p === undefined) return;
      slot.pending.delete(reply.id);
      if (reply.ok) p.resolve(reply);
      else p.reject(new WorkerError(reply.error, reply.field));
    });
    let failure = 'exited';
    worker.on('error', (err) => (failure = err.message));
    worker.on('exit', (code) => this.replace(slot, `${failure} (exit code ${code})`));
    // Workers must not keep the process alive on their own (the daemon closes them explicitly).
    worker.unref();
    return slot;
  }

  private replace(dead: Slot, reason: string): void {
    for (const p of dead.pending.values()) p.reject(new WorkerStoppedError(`solver worker ${dead.index} stopped: ${reason}`));
    dead.pending.clear();
    if (this.stopping) return;
    const fresh = this.spawn(dead.index);
    this.slots[dead.index] = fresh;
    const orphans = [...dead.streams];
    for (const stream of orphans) {
      const { declaration } = this.placements.get(stream)!;
      this.placements.delete(stream);
      this.place(stream, declaration).ready.catch((err: Error) => this.events.onRehomeFailed?.(stream, err));
    }
    this.events.onWorkerReplaced?.(dead.index, orphans, reason);
  }
}
