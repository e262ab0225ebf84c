/**
 * The matrix-free measurement operator every solver works on.
 *
 * Vectors are complex and interleaved in a Float64Array: [re0, im0, re1, im1, ...],
 * so a vector of n complex entries has length 2n. Outputs are caller-owned and
 * preallocated; implementations allocate nothing per call.
 */
export interface LinearOperator {
  /** Number of measurements m (complex entries of A x). */
  readonly rows: number;
  /** Number of unknowns n (complex entries of x). */
  readonly cols: number;
  /**
   * An upper bound on the spectral norm ‖A‖₂. Solvers take their step size from it,
   * so it must never be below the true norm.
   */
  readonly normBound: number;
  /** True when every entry of A is real (lets solvers and tests use real-only reasoning). */
  readonly real: boolean;
  /** out ← A x. x has length 2·cols, out has length 2·rows; x and out never alias. */
  apply(x: Float64Array, out: Float64Array): void;
  /** out ← Aᴴ y. y has length 2·rows, out has length 2·cols; y and out never alias. */
  adjoint(y: Float64Array, out: Float64Array): void;
}

/** A unitary (orthonormal) sparsity basis Ψ of size n: synthesis x = Ψ c, analysis c = Ψᴴ x. */
export interface UnitaryBasis {
  readonly size: number;
  readonly real: boolean;
  /** out ← Ψ c (coefficients to signal). */
  synthesize(c: Float64Array, out: Float64Array): void;
  /** out ← Ψᴴ x (signal to coefficients). */
  analyze(x: Float64Array, out: Float64Array): void;
}
