import { makeBasis, type UnitaryBasis } from '../../operators/index.js';
import type { StreamDeclaration } from '../../protocol/index.js';
import { RESIDUAL_ALERT, SyntheticFeed, type FeedOptions } from './synthetic.js';

/**
 * A telemetry channel on a low-rate link: each frame carries Gaussian random projections of a
 * window of a piecewise-constant signal (a valve position, a mode word, a setpoint). The levels
 * hold for a while and then step, on a grid of segment boundaries, so the signal is sparse in the
 * Haar basis. The operator works on Haar coefficients; the feed keeps the signal too.
 */
export interface TelemetryOptions extends FeedOptions {
  /** Samples per window (default 128; a power of two for the Haar basis). */
  n?: number;
  /** Projections per frame (default 48). */
  rows?: number;
  /** Samples per segment (default 16): levels only change on these boundaries. */
  segment?: number;
  /** Seed of the Gaussian matrix (default 9). */
  matrixSeed?: number;
}

export class TelemetryFeed extends SyntheticFeed {
  readonly kind = 'telemetry';
  readonly framesPerSecond = 5;
  readonly #basis: UnitaryBasis;
  readonly #segment: number;
  readonly #levels: Float64Array;
  /** The piecewise-constant signal behind the frame last produced (interleaved complex, real). */
  readonly signal: Float64Array;

  constructor(options: TelemetryOptions = {}) {
    const n = options.n ?? 128;
    const declaration: StreamDeclaration = {
      name: options.name ?? 'telemetry.channel',
      operator: { kind: 'gaussian', rows: options.rows ?? 48, cols: n, seed: options.matrixSeed ?? 9, basis: { kind: 'haar' } },
      solver: { method: 'omp', sparsity: 10 },
      noise_sigma: 0.02,
      alerts: [RESIDUAL_ALERT],
      queue: { capacity: 64, policy: 'refuse_new' },
      note: 'telemetry channel 4, projections of a piecewise-constant housekeeping signal',
    };
    super(declaration, options.seed ?? 3);
    this.#basis = makeBasis('haar', n);
    this.#segment = options.segment ?? 16;
    if (n % this.#segment !== 0) throw new Error(`segment ${this.#segment} does not divide n = ${n}`);
    this.#levels = new Float64Array(n / this.#segment);
    for (let s = 0; s < this.#levels.length; s++) this.#levels[s] = Math.round(4 * (this.random.nextDouble() - 0.5)) / 2;
    this.signal = new Float64Array(2 * n);
  }

  protected evolve(frame: number): void {
    // Every 25 frames one segment's level steps to a new value.
    if (frame > 0 && frame % 25 === 0) {
      const s = Math.floor(this.random.nextDouble() * this.#levels.length);
      this.#levels[s] = Math.round(4 * (this.random.nextDouble() - 0.5)) / 2;
    }
    for (let t = 0; t < this.signal.length / 2; t++) {
      this.signal[2 * t] = this.#levels[Math.floor(t / this.#segment)]!;
      this.signal[2 * t + 1] = 0;
    }
    this.#basis.analyze(this.signal, this.coefficients);
    // Exact zeros where the transform leaves rounding dust, so the truth's support is clean.
    for (let i = 0; i < this.coefficients.length; i++) if (Math.abs(this.coefficients[i]!) < 1e-12) this.coefficients[i] = 0;
  }
}
