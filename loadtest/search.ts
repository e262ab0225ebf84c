import { runStep, type LoadSession, type StepLimits, type StepResult } from './loadStep.js';

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
  maxSteps: number;
  /** Run a failing load a second time and count it as passing if that passes. */
  retryFailures: boolean;
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
  const attempt = async (label: string): Promise<boolean> => {
    const step = await runStep(session, { label, offeredFps: fps, seconds: settings.stepSeconds, settleSeconds: settings.settleSeconds }, limits);
    steps.push(step);
    onStep(step);
    return step.pass;
  };
  for (let i = 0; i < settings.maxSteps && mayStart(); i++) {
    // A failure is tried once more: other work on a shared machine only ever adds latency, so
    // one undisturbed pass shows that the daemon carries the load (common practice, no source).
    const pass = (await attempt(`search ${i + 1}`)) || (settings.retryFailures && mayStart() && (await attempt(`search ${i + 1} again`)));
    (pass ? passed : failed).push(fps);
    const next = nextLoad(passed, failed, settings);
    if (next === null) break;
    fps = next;
  }
  const { passing, failing } = bracket(passed, failed);
  return { steps, saturationFps: passing ?? 0, firstFailingFps: failing };
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
