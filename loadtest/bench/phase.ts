/**
 * Phase-transition bench: `npm run bench -- phase [--json] [--draws N]`.
 *
 * Measures, for each operator family and undersampling δ = m/n, the sparsity ratios ρ = s/m at
 * which l1 (basis pursuit) and reweighted l1 recover 90 %, 50 % and 10 % of random draws, and
 * writes them to solvers/phase-table.json (read by solvers/recoverability.ts) and a plot to
 * docs/phase-transition.svg. Prints `reweighted_over_l1_rho50`: ρ50 of reweighted l1 over ρ50 of
 * l1 for Gaussian matrices at δ = 0.25.
 *
 * Protocol (docs/solvers.md): per draw, a fresh seeded operator, a random order of the columns
 * and random amplitudes; the s-sparse signal uses the first s columns of that order, so signals
 * of one draw are nested. The draw's critical sparsity s_c is found by bisection on s (largest s
 * recovered; recovery treated as monotone in s within a draw). "Recovered" means relative error
 * below 1e-6 after the solver's refit. ρ90, ρ50, ρ10 are the 10 %, 50 % and 90 % quantiles of
 * s_c/m over the draws (the ρ at which that share of draws still succeeds).
 */
import { writeFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { GaborOperator, MT19937, gaborWindow, type LinearOperator } from '../../operators/index.js';
import { parseSolverSettings, solve, type SolverSettings } from '../../solvers/index.js';
import { dftSampling, gaussian, gaussianMatrix, measure, relativeError } from '../../solvers/test/helpers.js';

const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');

export interface Problem {
  A: LinearOperator;
  /** Columns in the random order of this draw. */
  order: Int32Array;
  /** Amplitudes (interleaved complex) for the columns in that order. */
  amplitudes: Float64Array;
}

export interface FamilySpec {
  name: 'gaussian' | 'gabor' | 'dft';
  description: string;
  complex: boolean;
  /** Targets of δ; each family realises them as closely as its shapes allow. */
  deltas: number[];
  /** The operator of one draw at target δ. */
  build(delta: number, seed: number): LinearOperator;
}

const DELTAS = [0.1, 0.15, 0.2, 0.25, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8];

export const FAMILIES: FamilySpec[] = [
  {
    name: 'gaussian',
    description: 'real Gaussian matrix N(0, 1/m), n = 100 columns, real amplitudes',
    complex: false,
    deltas: DELTAS,
    build: (delta, seed) => gaussianMatrix(Math.round(delta * 100), 100, seed),
  },
  {
    name: 'gabor',
    description: 'Gabor, Steinhaus window, n = 32 samples, delay-Doppler sub-grid of m/δ columns, complex amplitudes',
    complex: true,
    deltas: DELTAS,
    build: (delta, seed) => gaborForDelta(32, delta, seed),
  },
  {
    name: 'dft',
    description: 'random time samples of a DFT-sparse signal, n = 128, complex amplitudes',
    complex: true,
    deltas: DELTAS,
    build: (delta, seed) => dftSampling(128, Math.round(delta * 128), seed),
  },
];

/** A Gabor operator with n rows and about n/δ columns: K delays × L Doppler bins (L ≤ n). */
function gaborForDelta(n: number, delta: number, seed: number): LinearOperator {
  const cols = Math.round(n / delta);
  const delays = Math.ceil(cols / n);
  const bins = Math.max(1, Math.round(cols / delays));
  return new GaborOperator(n, gaborWindow({ kind: 'steinhaus', seed }, n), {
    delays,
    dopplerFrom: 0,
    dopplerTo: bins - 1,
  });
}

/** A draw's random column order and amplitudes (MT19937, reproducible). */
export function drawProblem(A: LinearOperator, complex: boolean, seed: number): Problem {
  const rng = new MT19937(seed);
  const n = A.cols;
  const order = new Int32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  for (let i = n - 1; i > 0; i--) {
    const j = Math.floor(rng.nextDouble() * (i + 1));
    const t = order[i]!;
    order[i] = order[j]!;
    order[j] = t;
  }
  const amplitudes = new Float64Array(2 * n);
  for (let i = 0; i < n; i++) {
    amplitudes[2 * i] = gaussian(rng);
    amplitudes[2 * i + 1] = complex ? gaussian(rng) : 0;
  }
  return { A, order, amplitudes };
}

/** The draw's s-sparse signal: the first s columns of its order. */
export function signalOf(p: Problem, s: number): Float64Array {
  const x = new Float64Array(2 * p.A.cols);
  for (let i = 0; i < s; i++) {
    const j = p.order[i]!;
    x[2 * j] = p.amplitudes[2 * i]!;
    x[2 * j + 1] = p.amplitudes[2 * i + 1]!;
  }
  return x;
}

/** Recovery of the s-sparse signal of a draw: relative error < 1e-6 after the refit. */
export function recovers(p: Problem, s: number, settings: SolverSettings): boolean {
  const x0 = signalOf(p, s);
  const r = solve(p.A, measure(p.A, x0), settings);
  return relativeError(r.x, x0) < 1e-6;
}

/** Largest s the draw recovers, by bisection between s = 0 (trivial) and s = m (never). */
function criticalSparsity(p: Problem, settings: SolverSettings): number {
  let lo = 0;
  let hi = p.A.rows;
  while (hi - lo > 1) {
    const mid = (lo + hi) >> 1;
    if (recovers(p, mid, settings)) lo = mid;
    else hi = mid;
  }
  return lo;
}

/** The q-quantile of sorted values (linear between order statistics). */
function quantile(sorted: number[], q: number): number {
  const pos = q * (sorted.length - 1);
  const i = Math.floor(pos);
  const t = pos - i;
  return i + 1 < sorted.length ? sorted[i]! * (1 - t) + sorted[i + 1]! * t : sorted[i]!;
}

/**
 * Settings of the measured solvers. Tolerances and caps are lower than the daemon's defaults to
 * keep the bench within minutes; a solve that stops at its cap counts as a failure, so the table
 * errs on the cautious side.
 */
export const METHODS = {
  l1: parseSolverSettings({ method: 'basis_pursuit', tolerance: 1e-4, maxIterations: 2000 }),
  reweighted_l1: parseSolverSettings({ method: 'reweighted_l1', tolerance: 1e-4, maxIterations: 1500, reweightings: 4 }),
} as const;
type MethodName = keyof typeof METHODS;

interface Curve {
  rho90: number[];
  rho50: number[];
  rho10: number[];
}

interface MeasuredFamily {
  description: string;
  amplitudes: 'real' | 'complex';
  delta: number[];
  m: number[];
  n: number[];
  l1: Curve;
  reweighted_l1: Curve;
}

function measureFamily(family: FamilySpec, draws: number): MeasuredFamily {
  const out: MeasuredFamily = {
    description: family.description,
    amplitudes: family.complex ? 'complex' : 'real',
    delta: [],
    m: [],
    n: [],
    l1: { rho90: [], rho50: [], rho10: [] },
    reweighted_l1: { rho90: [], rho50: [], rho10: [] },
  };
  for (const [k, target] of family.deltas.entries()) {
    const critical: Record<MethodName, number[]> = { l1: [], reweighted_l1: [] };
    let shape: LinearOperator | undefined;
    for (let d = 0; d < draws; d++) {
      const seed = 1_000_000 * (FAMILIES.indexOf(family) + 1) + 1000 * k + d;
      const A = family.build(target, seed);
      shape = A;
      const p = drawProblem(A, family.complex, seed + 500);
      for (const method of Object.keys(METHODS) as MethodName[]) {
        critical[method].push(criticalSparsity(p, METHODS[method]) / A.rows);
      }
    }
    out.delta.push(round(shape!.rows / shape!.cols));
    out.m.push(shape!.rows);
    out.n.push(shape!.cols);
    for (const method of Object.keys(METHODS) as MethodName[]) {
      const sorted = critical[method].sort((a, b) => a - b);
      out[method].rho90.push(round(quantile(sorted, 0.1)));
      out[method].rho50.push(round(quantile(sorted, 0.5)));
      out[method].rho10.push(round(quantile(sorted, 0.9)));
    }
  }
  return out;
}

function round(v: number): number {
  return Math.round(v * 1e4) / 1e4;
}

/** ρ50 at δ by linear interpolation over the measured points. */
function rho50At(f: MeasuredFamily, method: MethodName, delta: number): number {
  const xs = f.delta;
  const ys = f[method].rho50;
  let i = 1;
  while (i < xs.length - 1 && xs[i]! < delta) i++;
  const t = (delta - xs[i - 1]!) / (xs[i]! - xs[i - 1]!);
  return ys[i - 1]! + t * (ys[i]! - ys[i - 1]!);
}

export async function run(args: string[]): Promise<{ table: string; figures: Record<string, number> }> {
  const drawsArg = args.indexOf('--draws');
  const draws = drawsArg >= 0 ? Number(args[drawsArg + 1]) : 16;
  if (!Number.isInteger(draws) || draws < 3) throw new Error('--draws must be an integer ≥ 3');
  const started = performance.now();
  const families: Record<string, MeasuredFamily> = {};
  for (const family of FAMILIES) families[family.name] = measureFamily(family, draws);
  const seconds = (performance.now() - started) / 1000;

  const tableJson = {
    version: 1,
    protocol:
      'per draw: seeded operator, random column order and amplitudes (MT19937), nested signals; ' +
      'critical sparsity by bisection; recovered = relative error < 1e-6 after refit; ' +
      'rho90/rho50/rho10 = 10/50/90 % quantiles of s_c/m over draws (npm run bench -- phase)',
    draws,
    solvers: { l1: METHODS.l1, reweighted_l1: METHODS.reweighted_l1 },
    families,
  };
  writeFileSync(path.join(repoRoot, 'solvers/phase-table.json'), `${JSON.stringify(tableJson, null, 2)}\n`);
  writeFileSync(path.join(repoRoot, 'docs/phase-transition.svg'), phasePlot(families));

  const figures: Record<string, number> = {};
  const lines = [`phase transition: ${draws} draws per point, ${seconds.toFixed(0)} s`];
  for (const [name, f] of Object.entries(families)) {
    lines.push('', `${name}: ${f.description}`, '   δ       m    n   l1 ρ90  ρ50  ρ10   rw ρ90  ρ50  ρ10');
    for (let i = 0; i < f.delta.length; i++) {
      lines.push(
        `${f.delta[i]!.toFixed(3).padStart(6)} ${String(f.m[i]).padStart(5)} ${String(f.n[i]).padStart(4)}` +
          `  ${fmt(f.l1.rho90[i]!)} ${fmt(f.l1.rho50[i]!)} ${fmt(f.l1.rho10[i]!)}` +
          `   ${fmt(f.reweighted_l1.rho90[i]!)} ${fmt(f.reweighted_l1.rho50[i]!)} ${fmt(f.reweighted_l1.rho10[i]!)}`,
      );
    }
    const ratio = rho50At(f, 'reweighted_l1', 0.25) / rho50At(f, 'l1', 0.25);
    figures[name === 'gaussian' ? 'reweighted_over_l1_rho50' : `reweighted_over_l1_rho50_${name}`] = round(ratio);
  }
  lines.push('', 'wrote solvers/phase-table.json and docs/phase-transition.svg');
  return { table: lines.join('\n'), figures };
}

function fmt(v: number): string {
  return v.toFixed(2).padStart(5);
}

const COLORS: Record<string, string> = { gaussian: '#1b6ca8', gabor: '#b5431f', dft: '#3d8b37' };

/** A plain SVG: ρ50 against δ per family, solid for l1, dashed for reweighted l1, with ρ90–ρ10 bands. */
function phasePlot(families: Record<string, MeasuredFamily>): string {
  const W = 640;
  const H = 440;
  const left = 60;
  const right = 220;
  const top = 30;
  const bottom = 50;
  const px = (d: number): number => left + d * (W - left - right);
  const py = (r: number): number => H - bottom - r * (H - top - bottom);
  const parts: string[] = [
    `<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" font-family="sans-serif" font-size="12">`,
    `<rect width="${W}" height="${H}" fill="white"/>`,
    `<text x="${left}" y="18" font-size="14">Measured recovery transitions (50 % line; band 90 %–10 %)</text>`,
  ];
  for (let t = 0; t <= 10; t += 2) {
    const v = t / 10;
    parts.push(`<line x1="${px(v)}" y1="${py(0)}" x2="${px(v)}" y2="${py(1)}" stroke="#ddd"/>`);
    parts.push(`<line x1="${px(0)}" y1="${py(v)}" x2="${px(1)}" y2="${py(v)}" stroke="#ddd"/>`);
    parts.push(`<text x="${px(v)}" y="${py(0) + 16}" text-anchor="middle">${v.toFixed(1)}</text>`);
    parts.push(`<text x="${px(0) - 6}" y="${py(v) + 4}" text-anchor="end">${v.toFixed(1)}</text>`);
  }
  parts.push(`<text x="${(px(0) + px(1)) / 2}" y="${H - 12}" text-anchor="middle">δ = m/n (measurements per unknown)</text>`);
  parts.push(`<text x="16" y="${(py(0) + py(1)) / 2}" transform="rotate(-90 16 ${(py(0) + py(1)) / 2})" text-anchor="middle">ρ = s/m (nonzeros per measurement)</text>`);
  let legendY = top + 10;
  for (const [name, f] of Object.entries(families)) {
    const color = COLORS[name] ?? '#555';
    for (const method of ['l1', 'reweighted_l1'] as const) {
      const c = f[method];
      const band = [
        ...f.delta.map((d, i) => `${px(d).toFixed(1)},${py(c.rho10[i]!).toFixed(1)}`),
        ...f.delta.map((d, i) => `${px(d).toFixed(1)},${py(c.rho90[i]!).toFixed(1)}`).reverse(),
      ].join(' ');
      parts.push(`<polygon points="${band}" fill="${color}" fill-opacity="0.08" stroke="none"/>`);
      const line = f.delta.map((d, i) => `${px(d).toFixed(1)},${py(c.rho50[i]!).toFixed(1)}`).join(' ');
      const dash = method === 'l1' ? '' : ' stroke-dasharray="6 4"';
      parts.push(`<polyline points="${line}" fill="none" stroke="${color}" stroke-width="2"${dash}/>`);
      parts.push(`<line x1="${W - right + 14}" y1="${legendY}" x2="${W - right + 44}" y2="${legendY}" stroke="${color}" stroke-width="2"${dash}/>`);
      parts.push(`<text x="${W - right + 50}" y="${legendY + 4}">${name} (${f.amplitudes}), ${method === 'l1' ? 'l1' : 'reweighted'}</text>`);
      legendY += 20;
    }
  }
  parts.push('</svg>');
  return `${parts.join('\n')}\n`;
}
