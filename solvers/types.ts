import type { LinearOperator } from '../operators/types.js';

/**
 * What a solver carries from one frame of a stream to the next. Everything is optional
 * on input: a solver must accept a warm state from a different method and use what fits.
 */
export interface WarmState {
  /** Previous estimate (interleaved complex, length 2·cols). */
  x?: Float64Array;
  /** Previous support (sorted column indices). */
  support?: Int32Array;
  /** Regularisation level the previous frame ended on (LASSO λ). */
  lambda?: number;
  /** Step size / Lipschitz estimate the previous frame ended on. */
  step?: number;
  /**
   * Dual iterate the previous frame ended on (interleaved complex, length 2·rows): basis
   * pursuit and reweighted l1 restart their primal-dual iterations from it.
   */
  dual?: Float64Array;
  /**
   * Gram matrix A_SᴴA_S of the support the previous frame's LASSO finish used (k×k complex,
   * row-major, interleaved): a frame with the same support reuses it instead of k applies.
   */
  gram?: SupportGram;
}

/** The Gram matrix of a support, as LASSO carries it between frames. */
export interface SupportGram {
  /** Ascending column indices S (k of them). */
  support: Int32Array;
  /** A_SᴴA_S, k×k complex Hermitian, row-major, interleaved (length 2k²). */
  matrix: Float64Array;
}

/** A certificate of optimality or fit, with its name so a subscriber can read it. */
export interface Certificate {
  /** e.g. 'duality_gap' (relative), 'feasibility', 'residual_decrease'. */
  kind: string;
  value: number;
}

/** The evidence every solver returns with its estimate. */
export interface SolveResult {
  /** The estimate (interleaved complex, length 2·cols). Owned by the caller. */
  x: Float64Array;
  /** Sorted indices of the nonzero (above threshold) entries of x. */
  support: Int32Array;
  iterations: number;
  /** ‖A x − y‖₂ */
  residualNorm: number;
  /** ‖A x − y‖₂ / ‖y‖₂ (0 when y = 0). */
  relativeResidual: number;
  certificate: Certificate;
  converged: boolean;
  /** How the support moved against the warm state's support (both 0 without a warm support). */
  supportChange: { added: number; removed: number };
  /** State to pass to the next frame of the same stream. */
  warm: WarmState;
  /**
   * Further named figures behind the certificate, e.g. `lambda`, `epsilon`, `primal_residual`
   * and `dual_residual` for basis pursuit, `refit_iterations` (see docs/solvers.md for each method).
   */
  evidence?: Record<string, number>;
}

export type { LinearOperator };
