import { describe, expect, it } from 'vitest';
import { Pipeline, type FrameSubmission } from '../pipeline.js';
import type { PipelineEvent, QueueSettings, SolveBackend, SolveOutput, SolveTask, StreamDeclaration } from '../types.js';

// The orchestration checked against its contract (pipeline/pipeline.ts): per-stream order, one
// frame in flight per stream, streams in parallel, the declared queue policies, and the
// accounting rule that every submitted frame is refused, dropped (and announced) or published.

/** A solve backend the test releases by hand, recording what ran concurrently. */
class GatedBackend implements SolveBackend {
  readonly pending: Array<{ task: SolveTask; resolve: (o: SolveOutput) => void; reject: (e: unknown) => void }> = [];
  running = 0;
  maxRunning = 0;
  readonly maxPerStream = new Map<string, number>();
  private readonly perStream = new Map<string, number>();

  solve(task: SolveTask): Promise<SolveOutput> {
    this.running++;
    this.maxRunning = Math.max(this.maxRunning, this.running);
    const n = (this.perStream.get(task.stream) ?? 0) + 1;
    this.perStream.set(task.stream, n);
    this.maxPerStream.set(task.stream, Math.max(this.maxPerStream.get(task.stream) ?? 0, n));
    return new Promise((resolve, reject) => {
      const done = () => {
        this.running--;
        this.perStream.set(task.stream, this.perStream.get(task.stream)! - 1);
      };
      this.pending.push({
        task,
        resolve: (o) => (done(), resolve(o)),
        reject: (e) => (done(), reject(e)),
      });
    });
  }

  /** Settle every pending task (successfully unless `fail` says otherwise), until none remain. */
  async releaseAll(fail: (t: SolveTask) => boolean = () => false): Promise<void> {
    for (let guard = 0; guard < 1000; guard++) {
      await flush();
      const batch = this.pending.splice(0);
      if (batch.length === 0) return;
      for (const p of batch) (fail(p.task) ? p.reject(new Error('boom')) : p.resolve(solved(p.task)));
    }
  }
}

function solved(task: SolveTask): SolveOutput {
  return {
    evidence: {
      relative_residual: task.y[0]!, residual: 0, iterations: 3, certificate_kind: 'duality_gap', certificate: 0,
      converged: true, support_size: 1, added: 0, removed: 0, recoverability: 'safe', solve_ms: 0,
    },
    coldStart: false,
    hitIterationCap: false,
    indices: new Uint32Array([0]),
    values: new Float64Array([task.y[0]!, 0]),
    y: task.y,
  };
}

const flush = () => new Promise((r) => setImmediate(r));

function declaration(name: string, queue: QueueSettings, alerts: StreamDeclaration['alerts'] = []): StreamDeclaration {
  return { name, operator: {}, solver: {}, alerts, queue };
}

function frame(stream: string, seq: number, first = 0.001): FrameSubmission {
  const bytes = new Uint8Array(16);
  new DataView(bytes.buffer).setFloat64(0, first, true);
  return { stream, seq, time: seq, yBytes: bytes, receivedAt: performance.now() };
}

function setup(streams: StreamDeclaration[]) {
  const backend = new GatedBackend();
  const pipeline = new Pipeline({ backend });
  const events: PipelineEvent[] = [];
  pipeline.events.subscribe((e) => events.push(e));
  for (const d of streams) pipeline.addStream(d, { rows: 1, cols: 4, family: 'test' });
  return { backend, pipeline, events };
}

/** Results and missed notices of one stream in the order subscribers would see them. */
function announced(events: PipelineEvent[], stream: string): string[] {
  return events.flatMap((e) => {
    if (e.kind === 'result' && e.result.stream === stream) return [`r${e.result.seq}`];
    if (e.kind === 'missed' && e.missed.stream === stream) return [`m${e.missed.fromSeq}-${e.missed.toSeq}x${e.missed.count}`];
    return [];
  });
}

describe('Pipeline', () => {
  it('solves each stream in order with one frame in flight, streams in parallel', async () => {
    const q: QueueSettings = { capacity: 100, policy: 'refuse_new' };
    const { backend, pipeline, events } = setup([declaration('a', q), declaration('b', q)]);
    for (let seq = 0; seq < 20; seq++) {
      expect(pipeline.ingest(frame('a', seq))).toEqual({ accepted: true });
      expect(pipeline.ingest(frame('b', seq))).toEqual({ accepted: true });
    }
    await backend.releaseAll();
    await pipeline.whenIdle();
    expect(announced(events, 'a')).toEqual(Array.from({ length: 20 }, (_, i) => `r${i}`));
    expect(announced(events, 'b')).toEqual(Array.from({ length: 20 }, (_, i) => `r${i}`));
    expect(backend.maxPerStream.get('a')).toBe(1);
    expect(backend.maxRunning).toBe(2);
  });

  it('refuse_new refuses frames beyond the queue and does not consume their sequence numbers', async () => {
    const { backend, pipeline, events } = setup([declaration('a', { capacity: 2, policy: 'refuse_new' })]);
    const verdicts = [0, 1, 2, 3].map((s) => pipeline.ingest(frame('a', s)));
    // 0 is taken by the solver at once, 1 and 2 wait, 3 finds the queue full.
    expect(verdicts.map((v) => (v.accepted ? 'ok' : v.reason))).toEqual(['ok', 'ok', 'ok', 'queue_full']);
    await backend.releaseAll();
    expect(pipeline.ingest(frame('a', 3))).toEqual({ accepted: true });
    await backend.releaseAll();
    expect(announced(events, 'a')).toEqual(['r0', 'r1', 'r2', 'r3']);
  });

  it('drop_oldest announces the dropped range before the next result, in sequence order', async () => {
    const { backend, pipeline, events } = setup([declaration('a', { capacity: 2, policy: 'drop_oldest' })]);
    for (let s = 0; s < 6; s++) pipeline.ingest(frame('a', s)); // 0 solving; 1,2,3 displaced; 4,5 wait
    const drops = events.filter((e) => e.kind === 'dropped').map((e) => (e.kind === 'dropped' ? e.seq : -1));
    expect(drops).toEqual([1, 2, 3]);
    await backend.releaseAll();
    expect(announced(events, 'a')).toEqual(['r0', 'm1-3x3', 'r4', 'r5']);
    const r4 = events.find((e) => e.kind === 'result' && e.result.seq === 4);
    expect(r4?.kind === 'result' && r4.result.flags).toContain('frames_dropped_before');
  });

  it('keep_latest replaces everything waiting with the newest frame', async () => {
    const { backend, pipeline, events } = setup([declaration('a', { capacity: 3, policy: 'keep_latest' })]);
    for (let s = 0; s < 8; s++) pipeline.ingest(frame('a', s)); // 0 solving; 1..3 wait; 4 displaces 1..3; 5,6 wait; 7 displaces 4..6
    await backend.releaseAll();
    expect(announced(events, 'a')).toEqual(['r0', 'm1-6x6', 'r7']);
  });

  it('flags gaps, refuses duplicates and late frames', async () => {
    const { backend, pipeline, events } = setup([declaration('a', { capacity: 10, policy: 'refuse_new' })]);
    const outcome = [0, 1, 4, 4, 2, 5].map((s) => {
      const v = pipeline.ingest(frame('a', s));
      return v.accepted ? 'ok' : v.reason;
    });
    expect(outcome).toEqual(['ok', 'ok', 'ok', 'duplicate', 'out_of_order', 'ok']);
    await backend.releaseAll();
    const flagsOf = (seq: number) => events.flatMap((e) => (e.kind === 'result' && e.result.seq === seq ? e.result.flags : []));
    expect(flagsOf(4)).toEqual(['sequence_gap']);
    expect(flagsOf(5)).toEqual([]);
  });

  it('drops a frame whose solve fails, announces it, and carries on', async () => {
    const errors: number[] = [];
    const backend = new GatedBackend();
    const pipeline = new Pipeline({ backend, onSolveError: (_s, seq) => errors.push(seq) });
    const events: PipelineEvent[] = [];
    pipeline.events.subscribe((e) => events.push(e));
    pipeline.addStream(declaration('a', { capacity: 10, policy: 'refuse_new' }), { rows: 1, cols: 4, family: 'test' });
    for (let s = 0; s < 4; s++) pipeline.ingest(frame('a', s));
    await backend.releaseAll((t) => t.seq === 1);
    expect(errors).toEqual([1]);
    expect(announced(events, 'a')).toEqual(['r0', 'm1-1x1', 'r2', 'r3']);
    expect(events.find((e) => e.kind === 'missed')).toMatchObject({ missed: { reason: 'solver_failed' } });
  });

  it('raises and clears alerts from the published evidence', async () => {
    const rule = { metric: 'relative_residual' as const, above: 0.5, clear_below: 0.1, k: 2, of: 3 };
    const { backend, pipeline, events } = setup([declaration('a', { capacity: 100, policy: 'refuse_new' }, [rule])]);
    const residuals = [0.01, 0.9, 0.9, 0.9, 0.01, 0.01, 0.01];
    residuals.forEach((r, s) => pipeline.ingest(frame('a', s, r)));
    await backend.releaseAll();
    const alerts = events.flatMap((e) => (e.kind === 'alert' ? [[e.alert.seq, e.alert.state]] : []));
    expect(alerts).toEqual([
      [2, 'raised'],
      [5, 'cleared'],
    ]);
  });

  it('closing finishes the accepted frames, then refuses and removes the stream', async () => {
    const { backend, pipeline, events } = setup([declaration('a', { capacity: 10, policy: 'refuse_new' })]);
    for (let s = 0; s < 3; s++) pipeline.ingest(frame('a', s));
    const closed = pipeline.closeStream('a');
    expect(pipeline.ingest(frame('a', 3))).toMatchObject({ accepted: false, reason: 'stream_closing' });
    await backend.releaseAll();
    await closed;
    expect(announced(events, 'a')).toEqual(['r0', 'r1', 'r2']);
    expect(events[events.length - 1]).toEqual({ kind: 'stream_closed', stream: 'a' });
    expect(pipeline.has('a')).toBe(false);
    expect(pipeline.ingest(frame('a', 4))).toMatchObject({ accepted: false, reason: 'unknown_stream' });
  });

  it('a graceful stop refuses new frames and drops what still waits after the grace period', async () => {
    const { backend, pipeline, events } = setup([declaration('a', { capacity: 10, policy: 'refuse_new' })]);
    for (let s = 0; s < 4; s++) pipeline.ingest(frame('a', s));
    const stopped = pipeline.drainAll(20);
    expect(pipeline.ingest(frame('a', 4))).toMatchObject({ accepted: false, reason: 'shutting_down' });
    await stopped; // frame 0 still being solved; 1..3 dropped
    await backend.releaseAll();
    await pipeline.whenIdle();
    expect(announced(events, 'a')).toEqual(['r0', 'm1-3x3']);
    expect(events.find((e) => e.kind === 'missed')).toMatchObject({ missed: { reason: 'shutdown' } });
  });

  it('accounts for every submitted frame under a random mix of policies and faults', async () => {
    // Property: received = refused + dropped + solved, per stream, and every dropped seq is
    // inside exactly one announced missed range.
    const policies: QueueSettings['policy'][] = ['refuse_new', 'drop_oldest', 'keep_latest'];
    const { backend, pipeline, events } = setup(policies.map((p) => declaration(p, { capacity: 3, policy: p })));
    let seed = 12345;
    const rand = () => ((seed = (seed * 1103515245 + 12345) % 2 ** 31) / 2 ** 31);
    let refused = 0;
    const nextSeq = new Map(policies.map((p) => [p, 0]));
    for (let i = 0; i < 600; i++) {
      const p = policies[Math.floor(rand() * 3)]!;
      const seq = nextSeq.get(p)! + (rand() < 0.1 ? -1 : rand() < 0.1 ? 2 : 0);
      nextSeq.set(p, Math.max(seq + 1, nextSeq.get(p)!));
      if (!pipeline.ingest(frame(p, Math.max(0, seq))).accepted) refused++;
      if (rand() < 0.3) await backend.releaseAll((t) => t.seq % 17 === 0);
    }
    await backend.releaseAll((t) => t.seq % 17 === 0);
    await pipeline.whenIdle();
    let received = 0, accountedRefused = 0;
    for (const p of policies) {
      const st = pipeline.status(p)!;
      expect(st.counts.received).toBe(st.counts.refused + st.counts.dropped + st.counts.solved);
      received += st.counts.received;
      accountedRefused += st.counts.refused;
      const dropped = events.flatMap((e) => (e.kind === 'dropped' && e.stream === p ? [e.seq] : []));
      const ranges = events.flatMap((e) => (e.kind === 'missed' && e.missed.stream === p ? [e.missed] : []));
      expect(ranges.reduce((n, r) => n + r.count, 0)).toBe(dropped.length);
      for (const s of dropped) expect(ranges.filter((r) => s >= r.fromSeq && s <= r.toSeq)).toHaveLength(1);
      const results = events.flatMap((e) => (e.kind === 'result' && e.result.stream === p ? [e.result.seq] : []));
      expect(results).toEqual([...results].sort((x, y) => x - y));
    }
    expect(received).toBe(600);
    expect(accountedRefused).toBe(refused);
  });
});
