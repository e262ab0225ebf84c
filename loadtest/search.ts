import { runStep, type LoadSession, type StepLimits, type StepPlan, type StepResult } from './loadStep.js';
import { waitForQuiet } from './procStats.js';

/**
 * The saturation search: raise the offered load geometrically until a step breaks a limit
 * (p99 latency, loss, a timing subscriber that falls behind), then narrow the bracket between
 * the highest passing and the lowest failing load by geometric bisection. Every step is bounded
 * in time; the number of steps is bounded too.
 */
export interface SearchSettings {
  startFps: number;
  /** Factor between successive loads while no step has failed. */
  growth: number;
  /** Stop narrowing once lowest failing / highest passing ≤ 1 + precision. */
  precision: number;
  /** Loads tried at most. */
  maxSteps: number;
  /** Attempts per load at most (see `tryLoad`). */
  maxAttempts: number;
  /** Before another attempt after a disturbed one, wait this long at most for other programs to calm down. */
  quietWaitMs: number;
  /** Give up going down below this load. */
  minFps: number;
  stepSeconds: number;
  settleSeconds: number;
}

export interface SearchOutcome {
  steps: StepResult[];
  /** Highest offered load that passed; 0 when none did. */
  saturationFps: number;
  /** Lowest offered load that failed, if any did. */
  firstFailingFps: number | null;
}

export async function findSaturation(
  session: LoadSession,
  settings: SearchSettings,
  limits: StepLimits,
  onStep: (step: StepResult) => void = () => undefined,
  /** Asked before each step whether there is time for one more. */
  mayStart: () => boolean = () => true,
): Promise<SearchOutcome> {
  const steps: StepResult[] = [];
  const passed: number[] = [];
  const failed: number[] = [];
  let fps = settings.startFps;
  for (let i = 0; i < settings.maxSteps && mayStart(); i++) {
    const plan = { label: `search ${i + 1}`, offeredFps: fps, seconds: settings.stepSeconds, settleSeconds: settings.settleSeconds };
    const run = async (p: StepPlan) => {
      const step = await runStep(session, p, limits);
      onStep(step);
      return step;
    };
    const attempts = await tryLoad(run, plan, settings.maxAttempts, mayStart, () => waitForQuiet(limits.otherCpuLimitPercent, settings.quietWaitMs));
    steps.push(...attempts);
    (attempts.some((a) => a.pass) ? passed : failed).push(fps);
    const next = nextLoad(passed, failed, settings);
    if (next === null) break;
    fps = next;
  }
  const { passing, failing } = bracket(passed, failed);
  return { steps, saturationFps: passing ?? 0, firstFailingFps: failing };
}

/**
 * Runs one load until its verdict is clear, at most `maxAttempts` times: it passes as soon as an
 * attempt passes, and fails after two failed attempts that were not disturbed (or when attempts
 * run out). Other work on a shared machine only ever adds latency (common practice, no source),
 * so one clean pass shows the daemon carries the load, while a failure is believed only when it
 * repeats. After a disturbed attempt it first waits, bounded, for other programs to calm down.
 */
export async function tryLoad<S extends Pick<StepResult, 'pass' | 'disturbed'>>(
  run: (plan: StepPlan) => Promise<S>,
  plan: StepPlan,
  maxAttempts: number,
  mayStart: () => boolean,
  waitQuiet: () => Promise<unknown>,
): Promise<S[]> {
  const attempts: S[] = [];
  let cleanFailures = 0;
  for (let n = 1; n <= maxAttempts && (n === 1 || mayStart()); n++) {
    if (attempts.at(-1)?.disturbed) await waitQuiet();
    const step = await run({ ...plan, label: n === 1 ? plan.label : `${plan.label} (${n})` });
    attempts.push(step);
    if (step.pass) break;
    if (!step.disturbed && ++cleanFailures >= 2) break;
  }
  return attempts;
}

/**
 * The highest passing load, and the lowest failing load above it. On a shared machine a step can
 * fail below one that passed; such a failure no longer bounds the search from above.
 */
export function bracket(passed: number[], failed: number[]): { passing: number | null; failing: number | null } {
  const passing = passed.length > 0 ? Math.max(...passed) : null;
  const above = failed.filter((f) => passing === null || f > passing);
  return { passing, failing: above.length > 0 ? Math.min(...above) : null };
}

/** The next load to try, or null when the search is done. */
export function nextLoad(passed: number[], failed: number[], s: Pick<SearchSettings, 'growth' | 'precision' | 'minFps'>): number | null {
  const { passing, failing } = bracket(passed, failed);
  if (failing === null) return passing === null ? null : passing * s.growth;
  if (passing === null) {
    // Nothing has passed yet: step down, but not below the floor.
    const lower = failing / (s.growth * s.growth);
    return lower < s.minFps ? null : lower;
  }
  if (failing / passing <= 1 + s.precision) return null;
  return Math.sqrt(passing * failing);
}
