import table from './phase-table.json' with { type: 'json' };

/**
 * Where a frame sits relative to the empirical phase transition of l1 recovery (Donoho &
 * Tanner, "Counting faces of randomly projected polytopes when the projection radically lowers
 * dimension", J. Amer. Math. Soc. 22(1), 2009): with δ = m/n (undersampling) and ρ = s/m
 * (sparsity per measurement), recovery succeeds with high probability below a curve ρ(δ) and
 * fails above it. Our curves are measured, not taken from the literature: `npm run bench --
 * phase` writes solvers/phase-table.json (see docs/solvers.md for the protocol).
 *
 * For each operator family and δ the table holds three levels of ρ: rho90 (90 % of draws
 * recovered), rho50 and rho10. The verdict is 'safe' at or below rho90, 'marginal' up to rho10,
 * 'unlikely' above. margin = 1 − ρ/rho50: the share of the 50 % sparsity still unused
 * (negative past the transition).
 */

export type RecoveryMethod = 'l1' | 'reweighted_l1';
export type Verdict = 'safe' | 'marginal' | 'unlikely';

export interface Recoverability {
  /** The measured family the estimate is read from (see familyFor). */
  family: string;
  delta: number;
  rho: number;
  rho90: number;
  rho50: number;
  rho10: number;
  margin: number;
  verdict: Verdict;
}

interface Curve {
  rho90: number[];
  rho50: number[];
  rho10: number[];
}

interface FamilyTable {
  delta: number[];
  l1: Curve;
  reweighted_l1: Curve;
}

const families = table.families as Record<string, FamilyTable>;

/**
 * The measured family for an operator kind: Gaussian for dense random matrices (Bernoulli and
 * explicit matrices included: random matrices share the Gaussian transition, Donoho & Tanner,
 * Phil. Trans. R. Soc. A 367, 2009), 'dft' for random samples of DFT-sparse signals, 'gabor' for
 * Gabor operators; anything else falls back to Gaussian.
 */
export function familyFor(kind: string): string {
  switch (kind) {
    case 'gabor':
      return 'gabor';
    case 'sampling':
    case 'partial_dft':
    case 'dft':
      return 'dft' in families ? 'dft' : 'gaussian';
    default:
      return 'gaussian';
  }
}

/**
 * Recoverability of an s-sparse frame from m measurements of n unknowns for an operator family
 * (an operator description's `kind`, or a family name of the table), for plain l1 (also the
 * reference for LASSO and the greedy methods, which do no better) or reweighted l1.
 */
export function recoverability(
  kind: string,
  m: number,
  n: number,
  sparsity: number,
  method: RecoveryMethod = 'l1',
): Recoverability {
  const family = familyFor(kind);
  const entry = families[family]!;
  const delta = n > 0 ? m / n : 1;
  const rho = m > 0 ? sparsity / m : Infinity;
  const curve = entry[method];
  const rho90 = interpolate(entry.delta, curve.rho90, delta);
  const rho50 = interpolate(entry.delta, curve.rho50, delta);
  const rho10 = interpolate(entry.delta, curve.rho10, delta);
  let verdict: Verdict;
  if (sparsity === 0 || delta >= 1 || rho <= rho90) verdict = 'safe';
  else if (rho <= rho10) verdict = 'marginal';
  else verdict = 'unlikely';
  return { family, delta, rho, rho90, rho50, rho10, margin: 1 - rho / rho50, verdict };
}

/**
 * Piecewise-linear in δ over the measured points; below the first point towards ρ = 0 at δ = 0
 * (the transition vanishes there, so this errs on the cautious side), constant past the last.
 */
function interpolate(xs: number[], ys: number[], x: number): number {
  if (x <= xs[0]!) return (ys[0]! * Math.max(0, x)) / xs[0]!;
  const last = xs.length - 1;
  if (x >= xs[last]!) return ys[last]!;
  let i = 1;
  while (xs[i]! < x) i++;
  const t = (x - xs[i - 1]!) / (xs[i]! - xs[i - 1]!);
  return ys[i - 1]! + t * (ys[i]! - ys[i - 1]!);
}
