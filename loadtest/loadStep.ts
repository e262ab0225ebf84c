import { bucketQuantileMs, counterDelta, type DaemonCounters } from './daemonCounters.js';
import { LatencyRecorder, type LatencySummary } from './latency.js';
import type { LoadProducers, ProducerCounts } from './loadProducers.js';
import { readMachineCpu, type ProcessSampler, type UsageSummary } from './procStats.js';
import { perStreamRates, type LoadStream, type PreparedScenario } from './scenarios.js';
import type { ReferenceSubscriber, SlowSubscriber, SubscriberCounts } from './subscribers.js';

/** Everything a scenario's load runs through; steps are run one after another on it. */
export interface LoadSession {
  prepared: PreparedScenario;
  producers: LoadProducers;
  reference: ReferenceSubscriber;
  slow: SlowSubscriber[];
  /** Samples the daemon process when it is local (a child we started). */
  daemonSampler: ProcessSampler | undefined;
  /** The daemon's own counters, when its metrics endpoint can be read. */
  readCounters: () => Promise<DaemonCounters | undefined>;
}

/** The step that builds every stream's warm state and settles the JIT; its limits are not judged. */
export const WARMUP_LABEL = 'warm-up';

export interface StepPlan {
  label: string;
  /** Total frames per second over all streams. */
  offeredFps: number;
  /** How long frames are sent. */
  seconds: number;
  /** Frames scheduled in the first `settleSeconds` are sent and accounted, but not timed. */
  settleSeconds: number;
}

export interface StepLimits {
  /** p99 end-to-end latency above this fails the step. */
  p99LimitMs: number;
  /** (refused + dropped) / sent above this fails the step. */
  lossLimit: number;
  /** Longest wait after sending stops for every frame to be answered. */
  drainTimeoutMs: number;
  /**
   * A step during which other programs took more CPU than this (% of one core) is *disturbed*:
   * its latencies say more about them than about the daemon.
   */
  otherCpuLimitPercent: number;
}

export interface SlowSubscriberStep {
  policy: string;
  results: number;
  missed_behind: number;
  missed_dropped: number;
  /** Times the daemon closed this subscriber during the step (it reconnects each time). */
  closed_by_daemon: number;
}

export interface StepResult {
  label: string;
  offered_fps: number;
  /** Frames per second of each stream, by group label. */
  per_stream_fps: Record<string, number>;
  seconds: number;
  sent: number;
  /** Solved frames (results the reference subscriber got, plus those it was told it missed while behind). */
  solved: number;
  refused: number;
  /** Frames dropped by the daemon, as announced in `missed` notices. */
  dropped: number;
  /** sent − solved − refused − dropped (must be 0). */
  unaccounted: number;
  /** The producers' own view from the daemon's acks: solved and dropped. */
  acked: { solved: number; dropped: number; unaccounted: number };
  /** The daemon's metrics counters over the step (null when not readable). */
  daemon_counters: DaemonCounters | null;
  /**
   * The daemon's own view of latency, receipt to publication, from its histogram buckets: the
   * bucket bounds (ms) holding the median and the 99th percentile (null when not readable).
   */
  daemon_latency_ms: { p50_at_most: number | null; p99_at_most: number | null } | null;
  refused_by_reason: Record<string, number>;
  loss_fraction: number;
  /** Frames solved over the time from the step's start until every frame was answered. */
  throughput_fps: number;
  latency_ms: LatencySummary;
  /**
   * The solver's own time for the same frames, as the daemon's workers measured it: the solve
   * on a machine shared with the daemon's other threads and the generator, beside the bare one.
   */
  daemon_solve_ms: LatencySummary;
  /** How late frames left the generator against their schedule (already inside latency_ms). */
  send_lag_ms: LatencySummary;
  daemon: UsageSummary | null;
  /** This process (producers and subscribers), over the step and its drain, % of one core. */
  generator_cpu_percent: number;
  /**
   * The whole machine over the step and its drain, % of one core (100 × cores = all busy), and
   * what of it was neither the daemon nor this process: other programs competing for the CPUs.
   */
  machine_cpu_percent: number | null;
  other_cpu_percent: number | null;
  /** Other programs took more CPU than the limit during the step (never set when that cannot be measured). */
  disturbed: boolean;
  /** Results the reference subscriber missed by falling behind itself (timing then incomplete). */
  reference_missed_behind: number;
  alerts: number;
  missed_notices: number;
  slow_subscribers: SlowSubscriberStep[];
  /** Every frame answered before the drain timeout. */
  drained: boolean;
  failures: string[];
  pass: boolean;
  /** Why the step failed its limits (empty when it passed). */
  reasons: string[];
}

interface Snapshot {
  producer: ProducerCounts;
  refusedByReason: Map<string, number>;
  reference: SubscriberCounts;
  slow: SubscriberCounts[];
  slowClosures: number[];
  failures: number;
}

function snapshot(s: LoadSession): Snapshot {
  return {
    producer: { ...s.producers.counts },
    refusedByReason: new Map(s.producers.refusedByReason),
    reference: { ...s.reference.counts },
    slow: s.slow.map((x) => ({ ...x.counts })),
    slowClosures: s.slow.map((x) => x.closedByDaemon.length),
    failures: failureCount(s),
  };
}

function failureCount(s: LoadSession): number {
  return s.producers.failures.count + s.reference.failures.count + s.slow.reduce((n, x) => n + x.failures.count, 0);
}

function failureTexts(s: LoadSession): string[] {
  return [...s.producers.failures.first, ...s.reference.failures.first, ...s.slow.flatMap((x) => x.failures.first)];
}

/** Frames answered so far, in both views, against frames sent. */
function outstanding(s: LoadSession): { notices: number; acks: number } {
  const p = s.producers.counts;
  const r = s.reference.counts;
  return {
    notices: p.sent - p.refused - r.results - r.missedBehind - r.missedDropped,
    acks: p.sent - p.refused - p.ackedSolved - p.ackedDropped,
  };
}

/** Resolves true once every frame sent has been answered in both views, false at the timeout. */
export async function waitDrained(s: LoadSession, timeoutMs: number): Promise<boolean> {
  const deadline = performance.now() + timeoutMs;
  for (;;) {
    const o = outstanding(s);
    if (o.notices <= 0 && o.acks <= 0) return true;
    if (performance.now() > deadline) return false;
    await new Promise((r) => setTimeout(r, 20));
  }
}

/**
 * Sends the scenario's frames open-loop for `plan.seconds`: every stream on its own fixed
 * schedule, streams of a group staggered evenly, each frame stamped with its scheduled time.
 * A late send is not pushed back (latency counts from the schedule, so a stalled daemon or
 * generator cannot hide its own delay). Then waits until every frame is answered.
 */
export async function runStep(s: LoadSession, plan: StepPlan, limits: StepLimits): Promise<StepResult> {
  const { prepared } = s;
  const rates = perStreamRates(prepared.scenario, plan.offeredFps);
  const byGroup: LoadStream[][] = prepared.groups.map(() => []);
  for (const stream of prepared.streams) byGroup[stream.group]!.push(stream);

  const latency = new LatencyRecorder();
  const solves = new LatencyRecorder();
  const lag = new LatencyRecorder();
  const before = snapshot(s);
  const countersBefore = await s.readCounters();
  s.daemonSampler?.mark();
  const cpuBefore = process.cpuUsage();
  const machineBefore = readMachineCpu();
  const markedAt = performance.now();

  const start = performance.now() + 20;
  const timedFrom = start + plan.settleSeconds * 1000;
  s.reference.window = { recorder: latency, solves, fromEpochMs: performance.timeOrigin + timedFrom };

  // Per group: frame k is due at start + k / (group's aggregate rate) and goes to stream k mod count;
  // the step sends exactly round(aggregate rate × seconds) frames of the group.
  const schedule = prepared.groups.map((_, g) => {
    const aggregate = rates[g]! * byGroup[g]!.length;
    return { intervalMs: 1000 / aggregate, total: Math.round(aggregate * plan.seconds), k: 0 };
  });
  const due = (g: number) => start + schedule[g]!.k * schedule[g]!.intervalMs;
  await new Promise<void>((resolve) => {
    const tick = () => {
      const now = performance.now();
      let next = Number.POSITIVE_INFINITY;
      schedule.forEach((sch, g) => {
        const streams = byGroup[g]!;
        for (let at = due(g); sch.k < sch.total && at <= now; at = due(g)) {
          const stream = streams[sch.k % streams.length]!;
          s.producers.send(stream, at, prepared.groups[g]!.wireFrames);
          if (at >= timedFrom) lag.record(performance.now() - at);
          sch.k++;
        }
        if (sch.k < sch.total) next = Math.min(next, due(g));
      });
      if (next === Number.POSITIVE_INFINITY) return resolve();
      setTimeout(tick, Math.max(0, next - performance.now()));
    };
    setTimeout(tick, Math.max(0, start - performance.now()));
  });
  const drained = await waitDrained(s, limits.drainTimeoutMs);
  const answeredAt = performance.now();
  s.reference.window = null;
  const daemon = s.daemonSampler?.window() ?? null;
  const cpu = process.cpuUsage(cpuBefore);
  const machineAfter = readMachineCpu();
  const windowSeconds = (performance.now() - markedAt) / 1000;
  const generatorCpuPercent = (100 * (cpu.user + cpu.system)) / 1e6 / windowSeconds;
  const machineCpuPercent = machineBefore && machineAfter ? (100 * (machineAfter.busySeconds - machineBefore.busySeconds)) / windowSeconds : null;
  const otherCpuPercent = machineCpuPercent !== null && daemon ? Math.max(0, machineCpuPercent - daemon.cpuPercent - generatorCpuPercent) : null;
  const countersAfter = await s.readCounters();
  const after = snapshot(s);

  const p = diff(after.producer, before.producer);
  const r = diff(after.reference, before.reference);
  const sent = p.sent;
  const solved = r.results + r.missedBehind;
  const dropped = r.missedDropped;
  const refused = p.refused;
  const refusedByReason: Record<string, number> = {};
  for (const [reason, n] of after.refusedByReason) {
    const d = n - (before.refusedByReason.get(reason) ?? 0);
    if (d > 0) refusedByReason[reason] = d;
  }
  const latencySummary = latency.summary();
  const counters = countersBefore && countersAfter ? counterDelta(countersAfter, countersBefore) : null;
  const result: StepResult = {
    label: plan.label,
    offered_fps: plan.offeredFps,
    per_stream_fps: Object.fromEntries(prepared.groups.map((g, i) => [g.spec.label, rates[i]!])),
    seconds: plan.seconds,
    sent,
    solved,
    refused,
    dropped,
    unaccounted: sent - solved - refused - dropped,
    acked: { solved: p.ackedSolved, dropped: p.ackedDropped, unaccounted: sent - refused - p.ackedSolved - p.ackedDropped },
    daemon_counters: counters,
    daemon_latency_ms: counters
      ? { p50_at_most: bucketQuantileMs(counters.latencyBuckets, 0.5) ?? null, p99_at_most: bucketQuantileMs(counters.latencyBuckets, 0.99) ?? null }
      : null,
    refused_by_reason: refusedByReason,
    loss_fraction: sent > 0 ? (refused + dropped) / sent : 0,
    throughput_fps: (1000 * solved) / (answeredAt - start),
    latency_ms: latencySummary,
    daemon_solve_ms: solves.summary(),
    send_lag_ms: lag.summary(),
    daemon,
    generator_cpu_percent: generatorCpuPercent,
    machine_cpu_percent: machineCpuPercent,
    other_cpu_percent: otherCpuPercent,
    disturbed: otherCpuPercent !== null && otherCpuPercent > limits.otherCpuLimitPercent,
    reference_missed_behind: r.missedBehind,
    alerts: r.alerts,
    missed_notices: r.missedNotices,
    slow_subscribers: s.slow.map((x, i) => {
      const d = diff(after.slow[i]!, before.slow[i]!);
      return {
        policy: x.policy,
        results: d.results,
        missed_behind: d.missedBehind,
        missed_dropped: d.missedDropped,
        closed_by_daemon: after.slowClosures[i]! - before.slowClosures[i]!,
      };
    }),
    drained,
    failures: after.failures > before.failures ? failureTexts(s) : [],
    pass: false,
    reasons: [],
  };
  result.reasons = judge(result, limits);
  result.pass = result.reasons.length === 0;
  return result;
}

/** Why a step fails its limits; empty when it passes. */
export function judge(step: StepResult, limits: StepLimits): string[] {
  const reasons: string[] = [];
  if (step.latency_ms.p99 > limits.p99LimitMs) reasons.push(`p99 ${step.latency_ms.p99.toFixed(1)} ms > ${limits.p99LimitMs} ms`);
  if (step.loss_fraction > limits.lossLimit) reasons.push(`loss ${(100 * step.loss_fraction).toFixed(2)} % > ${(100 * limits.lossLimit).toFixed(2)} %`);
  if (step.reference_missed_behind > 0) reasons.push(`the timing subscriber fell behind (${step.reference_missed_behind} results missed)`);
  if (!step.drained) reasons.push('frames still unanswered at the drain timeout');
  if (step.failures.length > 0) reasons.push('connection or daemon errors');
  if (reasons.length > 0 && step.disturbed) reasons.push(`disturbed: other programs took ${step.other_cpu_percent!.toFixed(0)} % CPU`);
  return reasons;
}

function diff<T extends object>(after: T, before: T): T {
  const out = {} as Record<string, number>;
  for (const key of Object.keys(after)) out[key] = (after as Record<string, number>)[key]! - (before as Record<string, number>)[key]!;
  return out as T;
}
