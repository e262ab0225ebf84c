import os from 'node:os';
import { randomBytes } from 'node:crypto';
import type { BehindPolicy } from '../protocol/index.js';
import { measureBareSolve, mixtureMedian, type BareSolve } from './bareSolve.js';
import { finalAccounting, slowCatchUpMs, slowTotals, type ScenarioAccounting, type SlowSubscriberTotals } from './accounting.js';
import { startChildDaemon, type ChildDaemon } from './daemonProcess.js';
import { closeSession, openSession } from './loadSession.js';
import { runStep, waitDrained, WARMUP_LABEL, type LoadSession, type StepLimits, type StepResult } from './loadStep.js';
import { describeMachine, finishMachine, type MachineDescription } from './machine.js';
import { canSampleProcesses, waitForQuiet } from './procStats.js';
import {
  buildCustomScenario,
  buildScenario,
  frameShares,
  prepareScenario,
  totalForStreamRate,
  type CustomScenario,
  type PreparedScenario,
  type ScenarioName,
} from './scenarios.js';
import { findSaturation, type SearchSettings } from './search.js';

/** Everything a load run needs to know (the CLI fills it from flags and presets). */
export interface LoadSettings {
  mode: 'quick' | 'full';
  /** Scenarios in the order they run; 'custom' is the one described by `custom`. */
  scenarios: Array<ScenarioName | 'custom'>;
  smallStreams: number;
  custom?: CustomScenario;
  /** An existing daemon to load instead of starting one (pid: sample it when it runs here). */
  target: { url: string; token?: string; pid?: number } | null;
  /** Worker threads of the daemon we start (default: its own default, one per core). */
  workers?: number;
  streamsPerConnection: number;
  slowPolicies: BehindPolicy[];
  slowBytesPerSecond: number;
  limits: StepLimits;
  search: Pick<SearchSettings, 'growth' | 'precision' | 'maxSteps' | 'maxAttempts' | 'quietWaitMs' | 'stepSeconds' | 'settleSeconds'>;
  warmupSeconds: number;
  /** Length of the run at 70 % of saturation. */
  holdSeconds: number;
  /** The overload step runs at this multiple of saturation... */
  overloadFactor: number;
  /** ...for this long. */
  overloadSeconds: number;
  /** Run these loads instead of searching for saturation: total frames/s, or per stream. */
  fixedRates: { values: number[]; perStream: boolean } | null;
  /** The whole run stops starting new steps past this. */
  deadlineSeconds: number;
  signal?: AbortSignal;
  log: (line: string) => void;
}

export interface GroupReport {
  label: string;
  description: string;
  streams: number;
  relative_rate: number;
  share_of_frames: number;
  bare_solve_median_ms: number;
  bare_solve_p90_ms: number;
}

export interface ScenarioReport {
  name: ScenarioName | 'custom';
  summary: string;
  groups: GroupReport[];
  /** Median solve time of a frame drawn from the scenario's traffic, solved bare in-process. */
  median_bare_solve_ms: number;
  streams: number;
  producer_connections: number;
  declare_seconds: number;
  daemon: { kind: 'started' | 'target'; url: string; workers: number | null; measured: boolean };
  warmup: StepResult | null;
  steps: StepResult[];
  saturation_fps: number | null;
  first_failing_fps: number | null;
  at_70pct: StepResult | null;
  overload: StepResult | null;
  p99_over_median_solve_at_70pct: number | null;
  /** The same p99 over the median solve the daemon's workers reported during the hold (the solver on the shared, loaded machine). */
  p99_over_median_daemon_solve_at_70pct: number | null;
  /** Highest resident memory of the daemon during the scenario (VmHWM), MiB. */
  daemon_peak_rss_mb: number | null;
  accounting: ScenarioAccounting;
  /** Each slow subscriber over the whole scenario, after a bounded wait for it to catch up. */
  slow_subscribers: SlowSubscriberTotals[];
  problems: string[];
}

export interface LoadReport {
  suite: 'loadtest';
  format: 1;
  mode: LoadSettings['mode'];
  started_at: string;
  finished_at: string;
  duration_s: number;
  machine: MachineDescription;
  settings: Record<string, unknown>;
  scenarios: ScenarioReport[];
  figures: Record<string, number>;
  accounting_ok: boolean;
  problems: string[];
}

/** Runs every scenario of the settings, one daemon per scenario, and gathers the report. */
export async function runLoad(settings: LoadSettings): Promise<LoadReport> {
  const started = new Date();
  const t0 = performance.now();
  const machine = describeMachine();
  const deadline = t0 + settings.deadlineSeconds * 1000;
  const scenarios: ScenarioReport[] = [];
  const problems: string[] = [];
  const runId = randomBytes(3).toString('hex');
  for (const [i, name] of settings.scenarios.entries()) {
    if (settings.signal?.aborted) break;
    if (performance.now() > deadline) {
      problems.push(`time budget of ${settings.deadlineSeconds} s spent before scenario ${name}`);
      break;
    }
    // Each scenario gets an equal share of the time left, so an early one cannot starve the rest.
    const share = (deadline - performance.now()) / (settings.scenarios.length - i);
    scenarios.push(await runScenario(name, `lt${runId}`, settings, performance.now() + share));
  }
  const figures = headlineFigures(scenarios, settings.mode);
  return {
    suite: 'loadtest',
    format: 1,
    mode: settings.mode,
    started_at: started.toISOString(),
    finished_at: new Date().toISOString(),
    duration_s: (performance.now() - t0) / 1000,
    machine: finishMachine(machine),
    settings: settingsForReport(settings),
    scenarios,
    figures,
    accounting_ok: scenarios.every((s) => s.accounting.ok),
    problems: [...problems, ...scenarios.flatMap((s) => s.problems.map((p) => `${s.name}: ${p}`))],
  };
}

function settingsForReport(s: LoadSettings): Record<string, unknown> {
  return {
    scenarios: s.scenarios,
    small_streams: s.smallStreams,
    custom: s.custom ?? null,
    target: s.target ? s.target.url : null,
    workers: s.workers ?? null,
    streams_per_connection: s.streamsPerConnection,
    slow_subscribers: s.slowPolicies,
    slow_read_bytes_per_s: s.slowBytesPerSecond,
    p99_limit_ms: s.limits.p99LimitMs,
    loss_limit: s.limits.lossLimit,
    other_cpu_limit_percent: s.limits.otherCpuLimitPercent,
    drain_timeout_ms: s.limits.drainTimeoutMs,
    search: s.search,
    warmup_s: s.warmupSeconds,
    hold_s: s.holdSeconds,
    overload_factor: s.overloadFactor,
    overload_s: s.overloadSeconds,
    fixed_rates: s.fixedRates,
    deadline_s: s.deadlineSeconds,
  };
}

async function runScenario(name: ScenarioName | 'custom', prefix: string, settings: LoadSettings, deadline: number): Promise<ScenarioReport> {
  const log = settings.log;
  if (name === 'custom' && !settings.custom) throw new Error('the custom scenario needs its feed and sizes');
  const scenario = name === 'custom' ? buildCustomScenario(settings.custom!) : buildScenario(name, { smallStreams: settings.smallStreams });
  const prepared = prepareScenario(scenario, `${prefix}.${name}`);
  log(`${name}: ${prepared.scenario.summary}`);
  const shares = frameShares(prepared.scenario);
  const bare = prepared.groups.map((g) => measureBareSolve(g));
  const medianBare = mixtureMedian(bare.map((b, i) => ({ samplesMs: b.samplesMs, share: shares[i]! })));
  log(`${name}: bare solve median ${medianBare.toFixed(3)} ms (${bare.map((b) => `${b.label} ${b.medianMs.toFixed(3)} ms`).join(', ')})`);

  const problems: string[] = [];
  let child: ChildDaemon | null = null;
  const workers = settings.target ? null : (settings.workers ?? os.availableParallelism());
  const report: ScenarioReport = {
    name,
    summary: prepared.scenario.summary,
    groups: groupReports(prepared, bare, shares),
    median_bare_solve_ms: medianBare,
    streams: prepared.streams.length,
    producer_connections: 0,
    declare_seconds: 0,
    daemon: { kind: settings.target ? 'target' : 'started', url: '', workers, measured: false },
    warmup: null,
    steps: [],
    saturation_fps: null,
    first_failing_fps: null,
    at_70pct: null,
    overload: null,
    p99_over_median_solve_at_70pct: null,
    p99_over_median_daemon_solve_at_70pct: null,
    daemon_peak_rss_mb: null,
    accounting: { sent: 0, solved: 0, refused: 0, dropped: 0, unaccounted: 0, acked_unaccounted: 0, daemon_counters: null, daemon_counter_mismatch: 0, ok: true },
    slow_subscribers: [],
    problems,
  };
  let session: LoadSession | null = null;
  try {
    const url = settings.target?.url ?? (child = await startChildDaemon({ maxStreamsPerConnection: settings.streamsPerConnection, ...(settings.workers ? { workers: settings.workers } : {}) })).url;
    const pid = child?.pid ?? settings.target?.pid;
    report.daemon.url = url;
    report.daemon.measured = pid !== undefined && canSampleProcesses();
    const declareStart = performance.now();
    session = await openSession(prepared, {
      connection: { url, ...(settings.target?.token ? { token: settings.target.token } : {}) },
      streamsPerConnection: settings.streamsPerConnection,
      slowPolicies: settings.slowPolicies,
      slowBytesPerSecond: settings.slowBytesPerSecond,
      daemonPid: report.daemon.measured ? pid : undefined,
      declareTimeoutMs: 120_000,
    });
    report.declare_seconds = (performance.now() - declareStart) / 1000;
    report.producer_connections = session.producers.connectionCount;
    log(`${name}: ${prepared.streams.length} streams declared over ${session.producers.connectionCount} connections in ${report.declare_seconds.toFixed(1)} s`);
    const countersAtStart = await session.readCounters();
    const meanBare = bare.reduce((sum, b, i) => sum + shares[i]! * b.meanMs, 0);
    await runPhases(session, report, settings, deadline, meanBare);
    // A step that ran out of drain time leaves frames in flight: give them one more, longer wait.
    if (!(await waitDrained(session, FINAL_DRAIN_MS))) problems.push(`frames still unanswered ${FINAL_DRAIN_MS / 1000} s after the last step`);
    report.accounting = finalAccounting(session, countersAtStart, await session.readCounters(), settings.target === null);
    if (!report.accounting.ok) problems.push('accounting failed: see the accounting table');
    const usage = session.daemonSampler?.window();
    report.daemon_peak_rss_mb = usage?.peakRssMb ?? null;
    report.slow_subscribers = await slowTotals(session, report.accounting.solved + report.accounting.dropped, slowCatchUpMs(settings.mode));
  } catch (err) {
    problems.push((err as Error).message);
    report.accounting.ok = false;
  } finally {
    if (session) await closeSession(session, settings.target !== null, 60_000).catch((err: Error) => problems.push(`closing: ${err.message}`));
    if (child) {
      if (child.exited) problems.push(`the daemon exited during the run (${JSON.stringify(child.exited)}); its log ends: ${child.logTail()}`);
      await child.stop();
    }
  }
  return report;
}

/** Longest wait at the end of a scenario for frames still in flight. */
const FINAL_DRAIN_MS = 60_000;

function groupReports(prepared: PreparedScenario, bare: BareSolve[], shares: number[]): GroupReport[] {
  return prepared.scenario.groups.map((g, i) => ({
    label: g.label,
    description: g.description,
    streams: g.count,
    relative_rate: g.relativeRate,
    share_of_frames: shares[i]!,
    bare_solve_median_ms: bare[i]!.medianMs,
    bare_solve_p90_ms: bare[i]!.p90Ms,
  }));
}

/** Warm-up, then the search (or the fixed loads), then the hold at 70 % and the overload step. */
async function runPhases(session: LoadSession, report: ScenarioReport, settings: LoadSettings, deadline: number, meanBareMs: number): Promise<void> {
  const log = settings.log;
  const { limits } = settings;
  const stepLog = (s: StepResult) =>
    log(
      `${report.name}: ${s.label.padEnd(10)} offered ${s.offered_fps.toFixed(0).padStart(6)}/s solved ${s.throughput_fps.toFixed(0).padStart(6)}/s ` +
        `p50 ${s.latency_ms.p50.toFixed(1)} p99 ${s.latency_ms.p99.toFixed(1)} ms loss ${(100 * s.loss_fraction).toFixed(2)} %` +
        `${s.daemon ? ` daemon ${s.daemon.cpuPercent.toFixed(0)} % CPU ${s.daemon.rssMaxMb.toFixed(0)} MiB` : ''}` +
        `${s.other_cpu_percent !== null ? ` others ${s.other_cpu_percent.toFixed(0)} % CPU` : ''} ${s.pass ? 'pass' : `FAIL (${s.reasons.join('; ')})`}`,
    );
  const timeLeft = (seconds: number) => !settings.signal?.aborted && performance.now() + seconds * 1000 < deadline;
  const streams = session.prepared.streams.length;
  // Capacity guess from the mean bare solve time and the worker count, only to place the warm-up.
  const estimate = ((report.daemon.workers ?? os.availableParallelism()) * 1000) / meanBareMs;

  const warmFps = Math.min(0.3 * estimate, (2 * streams) / settings.warmupSeconds);
  report.warmup = await runStep(session, { label: WARMUP_LABEL, offeredFps: warmFps, seconds: settings.warmupSeconds, settleSeconds: 0 }, limits);
  stepLog(report.warmup);

  if (settings.fixedRates) {
    const { values, perStream } = settings.fixedRates;
    for (const [i, rate] of values.entries()) {
      if (!timeLeft(settings.search.stepSeconds)) break;
      const fps = perStream ? totalForStreamRate(session.prepared.scenario, rate) : rate;
      const step = await runStep(session, { label: `load ${i + 1}`, offeredFps: fps, seconds: settings.search.stepSeconds, settleSeconds: settings.search.settleSeconds }, limits);
      report.steps.push(step);
      stepLog(step);
    }
    return;
  }
  const startFps = searchStart(report.warmup, estimate);
  const search = { ...settings.search, startFps, minFps: startFps / 30 };
  // Keep time for the hold and overload steps after the search.
  const reserve = settings.holdSeconds + settings.overloadSeconds + 2 * settings.search.stepSeconds;
  const outcome = await findSaturation(session, search, limits, stepLog, () => timeLeft(settings.search.stepSeconds + reserve));
  report.steps.push(...outcome.steps);
  report.saturation_fps = outcome.saturationFps;
  report.first_failing_fps = outcome.firstFailingFps;
  log(`${report.name}: saturation ${outcome.saturationFps.toFixed(0)} frames/s`);
  if (outcome.saturationFps <= 0) return;
  // The hold gives the headline latency: repeat it (bounded) while other programs disturb it, and
  // keep the least disturbed attempt; the others stay in the step table.
  const holds: StepResult[] = [];
  for (let n = 1; n <= settings.search.maxAttempts && timeLeft(settings.holdSeconds + (n > 1 ? settings.overloadSeconds : 0)); n++) {
    if (n > 1) await waitForQuiet(limits.otherCpuLimitPercent, settings.search.quietWaitMs);
    const hold = await runStep(
      session,
      { label: n === 1 ? '70 %' : `70 % (${n})`, offeredFps: 0.7 * outcome.saturationFps, seconds: settings.holdSeconds, settleSeconds: settings.search.settleSeconds },
      limits,
    );
    holds.push(hold);
    stepLog(hold);
    if (!hold.disturbed) break;
  }
  if (holds.length > 0) {
    const best = holds.reduce((a, b) => ((b.other_cpu_percent ?? 0) < (a.other_cpu_percent ?? 0) ? b : a));
    report.steps.push(...holds.filter((h) => h !== best));
    report.at_70pct = best;
    report.p99_over_median_solve_at_70pct = best.latency_ms.p99 / report.median_bare_solve_ms;
    if (best.daemon_solve_ms.count > 0) report.p99_over_median_daemon_solve_at_70pct = best.latency_ms.p99 / best.daemon_solve_ms.p50;
  }
  if (timeLeft(settings.overloadSeconds)) {
    const overload = await runStep(
      session,
      { label: 'overload', offeredFps: settings.overloadFactor * outcome.saturationFps, seconds: settings.overloadSeconds, settleSeconds: settings.search.settleSeconds },
      limits,
    );
    report.overload = overload;
    stepLog(overload);
  }
}

/**
 * Where the search starts. When the daemon's CPU was measured, from what the warm-up cost the box
 * per frame (daemon and generator; cold first frames make it an overestimate, so the guess errs
 * low): 60 % of the cores over that cost. Otherwise a quarter of the bare-solve guess, which
 * leaves out everything but the solver.
 */
export function searchStart(warmup: StepResult, bareEstimateFps: number): number {
  if (warmup.daemon === null || warmup.sent === 0) return 0.25 * bareEstimateFps;
  // Both CPU figures cover the same window (the step and its drain).
  const cpuSecondsPerFrame = (warmup.daemon.cpuSeconds * (1 + warmup.generator_cpu_percent / warmup.daemon.cpuPercent)) / warmup.sent;
  if (!(cpuSecondsPerFrame > 0)) return 0.25 * bareEstimateFps;
  return Math.min((0.6 * os.availableParallelism()) / cpuSecondsPerFrame, 0.25 * bareEstimateFps);
}

/** Figure keys: lower-case words joined by '_'. */
const key = (name: string) => name.replace(/-/g, '_');

/**
 * The figures printed as the last line: the headline ones from the many-small-streams scenario
 * (the first scenario when that one did not run), and per-scenario ones in a full run.
 */
export function headlineFigures(scenarios: ScenarioReport[], mode: LoadSettings['mode']): Record<string, number> {
  const figures: Record<string, number> = {};
  const head = scenarios.find((s) => s.name === 'small') ?? scenarios[0];
  if (head) {
    if (head.saturation_fps !== null) figures.saturation_frames_per_s = round(head.saturation_fps);
    if (head.p99_over_median_solve_at_70pct !== null) figures.p99_over_median_solve_at_70pct = round(head.p99_over_median_solve_at_70pct);
    if (head.p99_over_median_daemon_solve_at_70pct !== null) figures.p99_over_median_daemon_solve_at_70pct = round(head.p99_over_median_daemon_solve_at_70pct);
    if (head.at_70pct) figures.p99_ms_at_70pct = round(head.at_70pct.latency_ms.p99);
    figures.median_bare_solve_ms = round(head.median_bare_solve_ms);
  }
  const small = scenarios.find((s) => s.name === 'small');
  if (small && small.daemon_peak_rss_mb !== null) figures[`rss_mb_${small.streams}_streams`] = round(small.daemon_peak_rss_mb);
  figures.unaccounted_frames = scenarios.reduce(
    (n, s) => n + Math.abs(s.accounting.unaccounted) + Math.abs(s.accounting.acked_unaccounted) + s.accounting.daemon_counter_mismatch,
    0,
  );
  if (mode !== 'quick') {
    for (const s of scenarios) {
      if (s === head) continue;
      if (s.saturation_fps !== null) figures[`saturation_frames_per_s_${key(s.name)}`] = round(s.saturation_fps);
      if (s.p99_over_median_solve_at_70pct !== null) figures[`p99_over_median_solve_at_70pct_${key(s.name)}`] = round(s.p99_over_median_solve_at_70pct);
      if (s.p99_over_median_daemon_solve_at_70pct !== null) {
        figures[`p99_over_median_daemon_solve_at_70pct_${key(s.name)}`] = round(s.p99_over_median_daemon_solve_at_70pct);
      }
    }
  }
  return figures;
}

const round = (v: number) => Math.round(v * 1000) / 1000;
