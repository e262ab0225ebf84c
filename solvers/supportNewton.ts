import type { LinearOperator } from '../operators/types.js';
import type { SupportGram } from './types.js';
import type { Workspace } from './workspace.js';

/**
 * Dense Newton steps for the LASSO optimality condition restricted to a small support S
 * (see fista.ts): (A_SᴴA_S + B) δ = rhs with the Gram matrix G = A_SᴴA_S formed once from k
 * applies and carried in the warm state, so that the next frame with the same support pays
 * nothing for it. The system is solved in its real form (B is real-linear, not complex-linear)
 * by a Cholesky factorisation.
 */

/** Supports up to this size take the dense path; larger ones use conjugate gradients. */
export const DENSE_SUPPORT_LIMIT = 64;

/**
 * The Gram matrix of the support: the cached one when it is for the same columns, its
 * submatrix when the cached support contains this one (a column that left), else built anew.
 */
export function gramFor(
  A: LinearOperator,
  support: Int32Array,
  count: number,
  cached: SupportGram | undefined,
  ws: Workspace,
): { gram: SupportGram; applies: number } {
  if (cached !== undefined) {
    const from = cached.support;
    const position = ws.colIndices('newton.position');
    let p = 0;
    let contained = true;
    for (let k = 0; k < count && contained; k++) {
      while (p < from.length && from[p]! < support[k]!) p++;
      contained = p < from.length && from[p] === support[k];
      position[k] = p;
    }
    if (contained && from.length === count) return { gram: cached, applies: 0 };
    if (contained) {
      const K = from.length;
      const matrix = new Float64Array(2 * count * count);
      for (let a = 0; a < count; a++) {
        for (let b = 0; b < count; b++) {
          const src = 2 * (position[a]! * K + position[b]!);
          matrix[2 * (a * count + b)] = cached.matrix[src]!;
          matrix[2 * (a * count + b) + 1] = cached.matrix[src + 1]!;
        }
      }
      return { gram: { support: support.slice(0, count), matrix }, applies: 0 };
    }
  }
  const m2 = 2 * A.rows;
  const columns = ws.floats('newton.columns', count * m2);
  const unit = ws.colVector('newton.unit');
  const image = ws.rowVector('newton.image');
  unit.fill(0);
  for (let k = 0; k < count; k++) {
    const j = support[k]!;
    unit[2 * j] = 1;
    A.apply(unit, image);
    unit[2 * j] = 0;
    columns.set(image, k * m2);
  }
  const matrix = new Float64Array(2 * count * count);
  for (let a = 0; a < count; a++) {
    for (let b = a; b < count; b++) {
      // G_ab = ⟨c_a, c_b⟩ = Σ conj(c_a) c_b.
      let re = 0;
      let im = 0;
      const ca = a * m2;
      const cb = b * m2;
      for (let i = 0; i < m2; i += 2) {
        const ar = columns[ca + i]!;
        const ai = columns[ca + i + 1]!;
        const br = columns[cb + i]!;
        const bi = columns[cb + i + 1]!;
        re += ar * br + ai * bi;
        im += ar * bi - ai * br;
      }
      matrix[2 * (a * count + b)] = re;
      matrix[2 * (a * count + b) + 1] = im;
      matrix[2 * (b * count + a)] = re;
      matrix[2 * (b * count + a) + 1] = -im;
    }
  }
  return { gram: { support: support.slice(0, count), matrix }, applies: count };
}

/** Newton steps on the Gram matrix until the restricted condition holds to this relative level. */
const NEWTON_TOLERANCE = 1e-13;
const NEWTON_MAX_STEPS = 8;

/**
 * Newton's method for F(x_S) = g_S + λ w_S ∘ x_S/|x_S| = 0 entirely on the Gram matrix: after a
 * step δ the restricted gradient moves by G δ, so no operator call is needed until the caller
 * evaluates the result. xs and gs (compact, 2k reals) hold x_S and g_S = (Aᴴ(A x − y))_S on entry
 * and the solution and its restricted gradient on exit. Returns false if a step failed
 * (singular matrix, an entry reaching zero), leaving xs where it got to.
 */
export function newtonOnGram(
  gram: SupportGram,
  lambda: number,
  weights: Float64Array | null,
  xs: Float64Array,
  gs: Float64Array,
  ws: Workspace,
): boolean {
  const k = gram.support.length;
  const G = gram.matrix;
  const rhs = ws.floats('newton.rhs', 2 * k);
  const delta = ws.floats('newton.delta', 2 * k);
  const blocks = ws.floats('newton.blocks', 3 * k);
  for (let step = 0; step < NEWTON_MAX_STEPS; step++) {
    let fSq = 0;
    let scaleSq = 0;
    for (let a = 0; a < k; a++) {
      const re = xs[2 * a]!;
      const im = xs[2 * a + 1]!;
      const modSq = re * re + im * im;
      if (!(modSq > 0)) return false;
      const lw = lambda * (weights === null ? 1 : weights[gram.support[a]!]!);
      const f = lw / Math.sqrt(modSq);
      rhs[2 * a] = -(gs[2 * a]! + f * re);
      rhs[2 * a + 1] = -(gs[2 * a + 1]! + f * im);
      fSq += rhs[2 * a]! ** 2 + rhs[2 * a + 1]! ** 2;
      scaleSq += lw * lw;
      blocks[3 * a] = (f * im * im) / modSq;
      blocks[3 * a + 1] = (-f * re * im) / modSq;
      blocks[3 * a + 2] = (f * re * re) / modSq;
    }
    if (fSq <= NEWTON_TOLERANCE * NEWTON_TOLERANCE * scaleSq) return true;
    if (!denseNewtonSolve(gram, blocks, rhs, delta, ws)) return false;
    for (let a = 0; a < k; a++) {
      xs[2 * a] = xs[2 * a]! + delta[2 * a]!;
      xs[2 * a + 1] = xs[2 * a + 1]! + delta[2 * a + 1]!;
      // g_S ← g_S + G δ (complex matrix times complex vector).
      let re = 0;
      let im = 0;
      for (let b = 0; b < k; b++) {
        const gr = G[2 * (a * k + b)]!;
        const gi = G[2 * (a * k + b) + 1]!;
        re += gr * delta[2 * b]! - gi * delta[2 * b + 1]!;
        im += gr * delta[2 * b + 1]! + gi * delta[2 * b]!;
      }
      gs[2 * a] = gs[2 * a]! + re;
      gs[2 * a + 1] = gs[2 * a + 1]! + im;
    }
  }
  return true;
}

/**
 * Solves (G + B) δ = rhs in real form. rhs and delta are compact (2k reals: re, im per entry),
 * blocks holds B as (b11, b12, b22) per entry. Returns false when the matrix is not positive
 * definite to working precision (A_S numerically rank deficient); the caller then falls back.
 */
export function denseNewtonSolve(
  gram: SupportGram,
  blocks: Float64Array,
  rhs: Float64Array,
  delta: Float64Array,
  ws: Workspace,
): boolean {
  const k = gram.support.length;
  const d = 2 * k;
  const h = ws.floats('newton.h', d * d);
  const G = gram.matrix;
  // Real form of the complex G acting on (re_b, im_b): [[Re G_ab, −Im G_ab], [Im G_ab, Re G_ab]].
  for (let a = 0; a < k; a++) {
    for (let b = 0; b < k; b++) {
      const gr = G[2 * (a * k + b)]!;
      const gi = G[2 * (a * k + b) + 1]!;
      h[2 * a * d + 2 * b] = gr;
      h[2 * a * d + 2 * b + 1] = -gi;
      h[(2 * a + 1) * d + 2 * b] = gi;
      h[(2 * a + 1) * d + 2 * b + 1] = gr;
    }
    h[2 * a * d + 2 * a] = h[2 * a * d + 2 * a]! + blocks[3 * a]!;
    h[2 * a * d + 2 * a + 1] = h[2 * a * d + 2 * a + 1]! + blocks[3 * a + 1]!;
    h[(2 * a + 1) * d + 2 * a] = h[(2 * a + 1) * d + 2 * a]! + blocks[3 * a + 1]!;
    h[(2 * a + 1) * d + 2 * a + 1] = h[(2 * a + 1) * d + 2 * a + 1]! + blocks[3 * a + 2]!;
  }
  // Cholesky h = L Lᵀ in place (lower triangle).
  let scale = 0;
  for (let i = 0; i < d; i++) scale = Math.max(scale, h[i * d + i]!);
  for (let j = 0; j < d; j++) {
    let diag = h[j * d + j]!;
    for (let p = 0; p < j; p++) diag -= h[j * d + p]! * h[j * d + p]!;
    if (!(diag > 1e-12 * scale)) return false;
    const ljj = Math.sqrt(diag);
    h[j * d + j] = ljj;
    for (let i = j + 1; i < d; i++) {
      let v = h[i * d + j]!;
      for (let p = 0; p < j; p++) v -= h[i * d + p]! * h[j * d + p]!;
      h[i * d + j] = v / ljj;
    }
  }
  for (let i = 0; i < d; i++) {
    let v = rhs[i]!;
    for (let p = 0; p < i; p++) v -= h[i * d + p]! * delta[p]!;
    delta[i] = v / h[i * d + i]!;
  }
  for (let i = d - 1; i >= 0; i--) {
    let v = delta[i]!;
    for (let p = i + 1; p < d; p++) v -= h[p * d + i]! * delta[p]!;
    delta[i] = v / h[i * d + i]!;
  }
  return true;
}
