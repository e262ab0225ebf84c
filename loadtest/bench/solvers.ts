/**
 * Solver benchmarks: `npm run bench -- solvers [--json] [--reference] [--draws N]`.
 *
 *   iter_over_fft_floor        one FISTA iteration on a subsampled DFT (n = 4096, m = 1024) over
 *                              two forward FFTs of n = 4096 (fft.js), measured in the same run:
 *                              alternating short batches, 10th percentile of each side.
 *   warm_over_cold_iterations  LASSO iterations per frame, warm start over cold start at the same
 *                              tolerance, on a stream of frames whose tones drift slowly.
 *   bp_l1_rel_diff_vs_lp       worst relative difference in ‖x‖₁ between basis pursuit (default
 *                              settings) and HiGHS's LP optimum over random real problems.
 *   success_300_30_10_l1       share of 100 draws in which plain l1 recovers 10 of 300 DFT
 *   success_300_30_10_refined  coefficients from 30 random time samples; the same for reweighted l1.
 *   ms_per_frame_over_numpy    (--reference) time per frame of the same FISTA over an equivalent
 *                              numpy script, when Debian's python3-numpy is present.
 */
import { execFileSync } from 'node:child_process';
import FFT from 'fft.js';
import { MT19937, sampleIndices, type LinearOperator } from '../../operators/index.js';
import { parseSolverSettings, solve, type SolveResult } from '../../solvers/index.js';
import { fista } from '../../solvers/fista.js';
import { workspaceFor } from '../../solvers/workspace.js';
import { l1MinimiserByLp } from '../../solvers/test/lpReference.js';
import {
  addNoise,
  dftSampling,
  gaussianMatrix,
  measure,
  relativeError,
  sparseVector,
} from '../../solvers/test/helpers.js';
import { quantile, timeBatch } from './support/timing.js';

interface Row {
  figure: string;
  value: number;
  target: string;
  note: string;
}

/** Alternating batches of subject and floor; each side at its 10th percentile over the rounds. */
function compare(subject: () => void, floor: () => void, batch: number, rounds: number): { subject: number; floor: number } {
  const s: number[] = [];
  const f: number[] = [];
  for (let r = 0; r < 5; r++) {
    subject();
    floor();
  }
  for (let r = 0; r < rounds; r++) {
    s.push(timeBatch(subject, batch));
    f.push(timeBatch(floor, batch));
  }
  return { subject: quantile(s, 0.1), floor: quantile(f, 0.1) };
}

/** A sparse spectrum of `tones` unit-size tones with random phases at fixed bins. */
function tonesAt(n: number, bins: number[], frame: number): Float64Array {
  const x = new Float64Array(2 * n);
  bins.forEach((b, i) => {
    // Slow drift: amplitude ±10 % and phase a few degrees per frame, different per tone.
    const amp = 1 + 0.25 * i + 0.1 * Math.sin(0.05 * frame + i);
    const phase = 1.3 * i + 0.03 * (i + 1) * frame;
    x[2 * b] = amp * Math.cos(phase);
    x[2 * b + 1] = amp * Math.sin(phase);
  });
  return x;
}

/**
 * FISTA iteration time over two FFTs on the n = 4096 subsampled DFT (m = 1024, 5 tones, noise
 * σ = 10⁻³, λ from the noise rule). Two starts, 20 iterations each with tolerances of zero and no
 * finish, so exactly 20 iterations plus one initial evaluation run:
 *   - from the previous frame's solution (sparse iterates: what a stream's frames run), the figure;
 *   - from zero (iterates dense for the first iterations: every entry pays a square root), shown
 *     as iter_over_fft_floor_from_zero.
 */
export function iterationOverFft(rows: Row[]): number {
  const n = 4096;
  const sigma = 1e-3;
  const A = dftSampling(n, 1024, 1);
  const x0 = tonesAt(n, [100, 917, 2048, 3001, 3900], 0);
  const y = measure(A, x0);
  addNoise(y, sigma, new MT19937(2));
  const ws = workspaceFor(A);
  const settings = parseSolverSettings({ method: 'lasso' });
  const previous = solve(A, y, settings, undefined, sigma).warm;
  const lambda = previous.lambda!;
  const ITERATIONS = 20;
  const opts = { lambda, weights: null, maxIterations: ITERATIONS, tolerance: 0, stepTolerance: 0, restart: true, finish: false };
  const fft = new FFT(n);
  const input = new Float64Array(2 * n);
  const output = new Float64Array(2 * n);
  const output2 = new Float64Array(2 * n);
  const rng = new MT19937(3);
  for (let i = 0; i < input.length; i++) input[i] = rng.nextDouble() - 0.5;
  const floor = (): void => {
    for (let k = 0; k < ITERATIONS + 1; k++) {
      fft.transform(output, input);
      fft.transform(output2, input);
    }
  };
  const x = new Float64Array(2 * n);
  const ratios: number[] = [];
  for (const start of [previous.x!, null]) {
    const timed = compare(
      () => {
        if (start === null) x.fill(0);
        else x.set(start);
        fista(A, y, x, opts, ws);
      },
      floor,
      4,
      60,
    );
    const ratio = timed.subject / timed.floor;
    ratios.push(ratio);
    rows.push({
      figure: start === null ? 'iter_over_fft_floor_from_zero' : 'iter_over_fft_floor',
      value: ratio,
      target: start === null ? 'report' : '≤ 1.5',
      note: `${(timed.subject / (ITERATIONS + 1)).toFixed(1)} µs per iteration vs ${(timed.floor / (ITERATIONS + 1)).toFixed(1)} µs per FFT pair (${start === null ? 'from zero' : 'from the previous solution'})`,
    });
  }
  return ratios[0]!;
}

/**
 * The drifting-tone stream: n = 1024, 256 fixed random sample positions, 5 tones on fixed bins
 * whose amplitudes and phases drift slowly (see tonesAt), complex noise at 40 dB below a unit
 * tone. Each frame is solved cold and warm (the warm state of the previous warm frame) with the
 * same settings and noise level; the figure is total warm over total cold iterations.
 */
function warmOverCold(rows: Row[]): number {
  const n = 1024;
  const A = dftSampling(n, 256, 4);
  const bins = [37, 150, 411, 690, 1000];
  const rng = new MT19937(5);
  const sigma = 0.01;
  const settings = parseSolverSettings({ method: 'lasso' });
  let warm: SolveResult['warm'] | undefined;
  let warmIterations = 0;
  let coldIterations = 0;
  let worstError = 0;
  const FRAMES = 60;
  for (let frame = 0; frame < FRAMES; frame++) {
    const x0 = tonesAt(n, bins, frame);
    const y = measure(A, x0);
    addNoise(y, sigma, rng);
    const cold = solve(A, y, settings, undefined, sigma);
    const hot = solve(A, y, settings, warm, sigma);
    if (!cold.converged || !hot.converged) throw new Error(`frame ${frame} did not converge`);
    warm = hot.warm;
    if (frame === 0) continue;
    coldIterations += cold.iterations;
    warmIterations += hot.iterations;
    worstError = Math.max(worstError, relativeError(hot.x, x0));
  }
  const ratio = warmIterations / coldIterations;
  rows.push({
    figure: 'warm_over_cold_iterations',
    value: ratio,
    target: '≤ 0.2',
    note: `${(warmIterations / (FRAMES - 1)).toFixed(1)} vs ${(coldIterations / (FRAMES - 1)).toFixed(1)} iterations per frame; worst error ${worstError.toExponential(1)}`,
  });
  return ratio;
}

async function basisPursuitVersusLp(rows: Row[]): Promise<number> {
  let worst = 0;
  let problems = 0;
  let failures = 0;
  for (const [m, n] of [
    [20, 60],
    [40, 100],
    [60, 150],
  ] as const) {
    for (const frac of [0.1, 0.3, 0.5, 0.7]) {
      const A: LinearOperator = gaussianMatrix(m, n, 7000 + problems);
      const x0 = sparseVector(n, Math.max(1, Math.round(frac * m)), new MT19937(8000 + problems), false);
      const y = measure(A, x0);
      const lp = await l1MinimiserByLp(A, y);
      const r = solve(A, y, parseSolverSettings({ method: 'basis_pursuit' }));
      let l1 = 0;
      for (let i = 0; i < r.x.length; i += 2) l1 += Math.hypot(r.x[i]!, r.x[i + 1]!);
      worst = Math.max(worst, Math.abs(l1 - lp.l1) / lp.l1);
      if (relativeError(lp.x, x0) > 1e-3) failures++;
      problems++;
    }
  }
  rows.push({
    figure: 'bp_l1_rel_diff_vs_lp',
    value: worst,
    target: '≤ 1e-6',
    note: `${problems} real Gaussian problems (${failures} beyond recovery), default settings`,
  });
  return worst;
}

function successRates(rows: Row[], draws: number): { l1: number; refined: number } {
  const l1 = parseSolverSettings({ method: 'basis_pursuit' });
  const refined = parseSolverSettings({ method: 'reweighted_l1' });
  let ok1 = 0;
  let ok2 = 0;
  for (let d = 0; d < draws; d++) {
    const A = dftSampling(300, 30, 300_000 + d);
    const x0 = sparseVector(300, 10, new MT19937(400_000 + d), true);
    const y = measure(A, x0);
    if (relativeError(solve(A, y, l1).x, x0) < 1e-6) ok1++;
    if (relativeError(solve(A, y, refined).x, x0) < 1e-6) ok2++;
  }
  rows.push({ figure: 'success_300_30_10_l1', value: ok1 / draws, target: 'minority', note: `${draws} draws` });
  rows.push({ figure: 'success_300_30_10_refined', value: ok2 / draws, target: '≥ 0.5', note: 'reweighted l1' });
  return { l1: ok1 / draws, refined: ok2 / draws };
}

/**
 * The same per-frame work in numpy: Aᴴy, FISTA with the same updates, restart and duality gap
 * for a fixed number of iterations, the residual at the end; A applied through numpy's FFT.
 */
const NUMPY_FISTA = String.raw`
import json, sys, time
import numpy as np
p = json.load(sys.stdin)
n, idx, lam, iters, frames = p['n'], np.array(p['indices']), p['lambda'], p['iterations'], p['frames']
y = np.array(p['y_re']) + 1j * np.array(p['y_im'])
s = 1 / np.sqrt(n)
def A(x): return np.fft.ifft(x)[idx] * (n * s)
def AH(r):
    z = np.zeros(n, complex); z[idx] = r
    return np.fft.fft(z) * s
def shrink(u, t):
    m = np.abs(u)
    return np.where(m > t, (1 - t / np.maximum(m, 1e-300)) * u, 0)
def frame():
    aty = AH(y)
    x = np.zeros(n, complex); ax = A(x); g = AH(ax - y)
    xp, axp, gp = x.copy(), ax.copy(), g.copy(); t = 1.0
    for k in range(iters):
        tn = (1 + np.sqrt(1 + 4 * t * t)) / 2; b = (t - 1) / tn
        z = x + b * (x - xp); gz = g + b * (g - gp)
        xn = shrink(z - gz, lam)
        axn = A(xn); r = axn - y; gn = AH(r)
        dual = np.max(np.abs(gn)); sc = min(1, lam / dual) if dual > 0 else 1
        P = 0.5 * np.vdot(r, r).real + lam * np.sum(np.abs(xn))
        D = -sc * np.vdot(y, r).real - 0.5 * sc * sc * np.vdot(r, r).real
        gap = (P - D) / P
        restart = np.vdot(z - xn, xn - x).real > 0
        xp, x, axp, ax, gp, g = x, xn, ax, axn, g, gn
        t = 1.0 if restart else tn
    return np.linalg.norm(A(x) - y), aty
frame()
start = time.perf_counter()
for _ in range(frames): frame()
print(json.dumps({'ms_per_frame': (time.perf_counter() - start) * 1000 / frames}))
`;

function numpyReference(rows: Row[]): number | undefined {
  try {
    execFileSync('python3', ['-c', 'import numpy'], { stdio: 'ignore' });
  } catch {
    rows.push({ figure: 'ms_per_frame_over_numpy', value: Number.NaN, target: 'report', note: 'skipped: python3-numpy is not installed' });
    return undefined;
  }
  const n = 4096;
  const m = 1024;
  const A = dftSampling(n, m, 1);
  const indices = sampleIndices({ law: 'uniform', m, seed: 1 }, n);
  const y = measure(A, tonesAt(n, [100, 917, 2048, 3001, 3900], 0));
  addNoise(y, 1e-3, new MT19937(2));
  const ITERATIONS = 100;
  const FRAMES = 20;
  const lambda = 0.01;
  const settings = parseSolverSettings({
    method: 'lasso',
    lambda,
    continuation: false,
    tolerance: 1e-15,
    stepTolerance: 0,
    maxIterations: ITERATIONS,
    refit: false,
  });
  solve(A, y, settings);
  const times: number[] = [];
  for (let f = 0; f < FRAMES; f++) {
    const start = process.hrtime.bigint();
    solve(A, y, settings);
    times.push(Number(process.hrtime.bigint() - start) / 1e6);
  }
  const ours = times.reduce((a, b) => a + b, 0) / FRAMES;
  const yRe: number[] = [];
  const yIm: number[] = [];
  for (let i = 0; i < m; i++) {
    yRe.push(y[2 * i]!);
    yIm.push(y[2 * i + 1]!);
  }
  const input = JSON.stringify({ n, indices: [...indices], lambda, iterations: ITERATIONS, frames: FRAMES, y_re: yRe, y_im: yIm });
  const out = JSON.parse(execFileSync('python3', ['-c', NUMPY_FISTA], { input, encoding: 'utf8' })) as { ms_per_frame: number };
  const ratio = ours / out.ms_per_frame;
  rows.push({
    figure: 'ms_per_frame_over_numpy',
    value: ratio,
    target: 'report',
    note: `${ours.toFixed(2)} ms vs ${out.ms_per_frame.toFixed(2)} ms per frame (${ITERATIONS} FISTA iterations, n = ${n}, m = ${m})`,
  });
  return ratio;
}

export async function run(args: string[]): Promise<{ table: string; figures: Record<string, number> }> {
  const drawsArg = args.indexOf('--draws');
  const draws = drawsArg >= 0 ? Number(args[drawsArg + 1]) : 100;
  if (!Number.isInteger(draws) || draws < 1) throw new Error('--draws must be a positive integer');
  const rows: Row[] = [];
  iterationOverFft(rows);
  warmOverCold(rows);
  await basisPursuitVersusLp(rows);
  successRates(rows, draws);
  if (args.includes('--reference')) numpyReference(rows);

  const figures: Record<string, number> = {};
  const lines = ['figure                       value      target   note'];
  for (const r of rows) {
    if (Number.isFinite(r.value)) figures[r.figure] = Number(r.value.toPrecision(4));
    const shown = Number.isFinite(r.value) ? (Math.abs(r.value) < 1e-3 && r.value !== 0 ? r.value.toExponential(2) : r.value.toFixed(3)) : 'skipped';
    lines.push(`${r.figure.padEnd(28)} ${shown.padStart(9)}  ${r.target.padEnd(8)} ${r.note}`);
  }
  return { table: lines.join('\n'), figures };
}
