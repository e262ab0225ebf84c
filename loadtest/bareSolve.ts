import { StreamSolver } from '../pipeline/streamSolver.js';
import { DEFAULT_QUEUE } from '../protocol/index.js';
import type { PreparedGroup } from './scenarios.js';

/**
 * The bare solve time of a group's frames: the code a daemon worker runs (StreamSolver), in this
 * process, one frame after another with warm starts, before any load is offered. The first pass
 * over the frames (operator build, JIT warm-up, cold start) is not timed; of the timed passes each
 * frame keeps its fastest time, since interference from other work only ever adds time (common
 * practice, no source) and the bare time is the undisturbed one.
 */
export interface BareSolve {
  label: string;
  medianMs: number;
  meanMs: number;
  p90Ms: number;
  /** Every timed solve, ascending. */
  samplesMs: number[];
}

export function measureBareSolve(group: PreparedGroup, timedPasses = 3): BareSolve {
  const declaration = { ...group.declaration, alerts: [], queue: { ...DEFAULT_QUEUE } };
  const solver = new StreamSolver(declaration);
  const fastest = group.frames.map(() => Number.POSITIVE_INFINITY);
  for (let pass = 0; pass <= timedPasses; pass++) {
    group.frames.forEach((y, i) => {
      const started = performance.now();
      solver.solve(y.slice(), group.declaration.noise_sigma, false);
      if (pass > 0) fastest[i] = Math.min(fastest[i]!, performance.now() - started);
    });
  }
  const samples = fastest.sort((a, b) => a - b);
  return {
    label: group.spec.label,
    medianMs: quantile(samples, 0.5),
    meanMs: samples.reduce((a, b) => a + b, 0) / samples.length,
    p90Ms: quantile(samples, 0.9),
    samplesMs: samples,
  };
}

/** The q-quantile of ascending values (nearest rank: the smallest value with at least q of the values at or below it). */
export function quantile(ascending: number[], q: number): number {
  if (ascending.length === 0) return Number.NaN;
  const rank = Math.max(1, Math.ceil(q * ascending.length));
  return ascending[rank - 1]!;
}

/**
 * The median of a mixture: each group's samples weighted by the group's share of the frames,
 * i.e. the median solve time of a frame drawn from the scenario's traffic.
 */
export function mixtureMedian(groups: Array<{ samplesMs: number[]; share: number }>): number {
  const weighted: Array<{ value: number; weight: number }> = [];
  for (const g of groups) {
    if (g.samplesMs.length === 0 || g.share <= 0) continue;
    for (const value of g.samplesMs) weighted.push({ value, weight: g.share / g.samplesMs.length });
  }
  if (weighted.length === 0) return Number.NaN;
  weighted.sort((a, b) => a.value - b.value);
  const total = weighted.reduce((s, w) => s + w.weight, 0);
  let running = 0;
  for (const w of weighted) {
    running += w.weight;
    if (running >= total / 2 - 1e-12) return w.value;
  }
  return weighted[weighted.length - 1]!.value;
}
