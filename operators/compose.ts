import type { LinearOperator, UnitaryBasis } from './types.js';

/**
 * A = Φ ∘ synthesis: the unknowns are the basis coefficients c, x = synthesize(c) and the
 * measurements are Φ x; Aᴴ = analysis ∘ Φᴴ. The basis is unitary, so ‖A‖ = ‖Φ‖.
 */
export class ComposedOperator implements LinearOperator {
  readonly rows: number;
  readonly cols: number;
  readonly normBound: number;
  readonly real: boolean;
  private readonly signal: Float64Array;

  constructor(
    readonly measurement: LinearOperator,
    readonly basis: UnitaryBasis,
  ) {
    if (basis.size !== measurement.cols) {
      throw new RangeError(`basis size ${basis.size} differs from the operator's ${measurement.cols} columns`);
    }
    this.rows = measurement.rows;
    this.cols = measurement.cols;
    this.normBound = measurement.normBound;
    this.real = measurement.real && basis.real;
    this.signal = new Float64Array(2 * this.cols);
  }

  apply(c: Float64Array, out: Float64Array): void {
    this.basis.synthesize(c, this.signal);
    this.measurement.apply(this.signal, out);
  }

  adjoint(y: Float64Array, out: Float64Array): void {
    this.measurement.adjoint(y, this.signal);
    this.basis.analyze(this.signal, out);
  }
}
