import { buildOperator, MT19937, parseOperatorDescription, type LinearOperator } from '../../operators/index.js';
import type { AlertRule, StreamDeclaration } from '../../protocol/index.js';

/**
 * A synthetic feed: an invented scenario whose sparse coefficients c evolve from frame to frame,
 * measured as y = A c + noise through the operator its declaration describes. Feeds know their
 * truth, so tests (and the dashboard's tests) can check what the daemon recovers.
 */
export interface Feed {
  /** Which scenario. */
  readonly kind: FeedKind;
  readonly declaration: StreamDeclaration;
  readonly operator: LinearOperator;
  /** Frames per second the scenario runs at. */
  readonly framesPerSecond: number;
  /** Frames produced so far. */
  readonly frameCount: number;
  /** Produces the next frame's measurements (a buffer the feed reuses: send or copy it at once). */
  next(): Float64Array;
  /** The coefficients behind the frame last produced (nonzeros only, indices ascending). */
  truth(): FeedTruth;
  /** Makes the next `frames` frames noisy (noise `factor` times the declared level) so alerts fire. */
  burst(frames: number, factor?: number): void;
  /** Frames of the current burst still to come. */
  readonly burstRemaining: number;
}

export type FeedKind = 'gearbox' | 'range' | 'telemetry';

export interface FeedTruth {
  indices: Uint32Array;
  /** Interleaved complex. */
  values: Float64Array;
}

export interface FeedOptions {
  /** Stream name (each scenario has a default). */
  name?: string;
  /** Seed of the scenario's own randomness: motion and noise (not the operator's seed). */
  seed?: number;
}

/** Noise burst strength when not given: large enough to swamp the signal's fine structure. */
export const DEFAULT_BURST_FACTOR = 40;

/** A gentle rule set every demo stream carries: relative residual high in 3 of the last 5 frames. */
export const RESIDUAL_ALERT: AlertRule = { metric: 'relative_residual', above: 0.25, clear_below: 0.1, k: 3, of: 5 };

/**
 * The machinery all three scenarios share: builds the operator from the declaration, holds the
 * dense coefficient vector, and draws measurement noise from a seeded MT19937.
 */
export abstract class SyntheticFeed implements Feed {
  abstract readonly kind: FeedKind;
  abstract readonly framesPerSecond: number;
  readonly operator: LinearOperator;
  /** Dense coefficients (interleaved complex, length 2·cols); subclasses write them in `evolve`. */
  protected readonly coefficients: Float64Array;
  protected readonly random: MT19937;
  readonly #y: Float64Array;
  readonly #sigma: number;
  /** Noise on real parts only for real scenarios (a real operator on a real signal). */
  readonly #complexNoise: boolean;
  #frames = 0;
  #burstLeft = 0;
  #burstFactor = DEFAULT_BURST_FACTOR;
  #spareGaussian: number | null = null;

  constructor(
    readonly declaration: StreamDeclaration,
    seed: number,
  ) {
    this.operator = buildOperator(parseOperatorDescription(declaration.operator));
    this.coefficients = new Float64Array(2 * this.operator.cols);
    this.#y = new Float64Array(2 * this.operator.rows);
    this.#sigma = declaration.noise_sigma ?? 0;
    this.#complexNoise = !this.operator.real;
    this.random = new MT19937(seed >>> 0);
  }

  get frameCount(): number {
    return this.#frames;
  }

  get burstRemaining(): number {
    return this.#burstLeft;
  }

  next(): Float64Array {
    this.evolve(this.#frames);
    this.operator.apply(this.coefficients, this.#y);
    const sigma = this.#burstLeft > 0 ? this.#sigma * this.#burstFactor : this.#sigma;
    if (this.#burstLeft > 0) this.#burstLeft--;
    if (sigma > 0) {
      // σ is the rms noise per measurement, E|eᵢ|² = σ² (the solvers' convention): complex noise
      // puts σ²/2 in each part, real noise all of it in the real part.
      const perPart = this.#complexNoise ? sigma / Math.SQRT2 : sigma;
      for (let i = 0; i < this.#y.length; i += 2) {
        this.#y[i]! += perPart * this.gaussian();
        if (this.#complexNoise) this.#y[i + 1]! += perPart * this.gaussian();
      }
    }
    this.#frames++;
    return this.#y;
  }

  truth(): FeedTruth {
    const indices: number[] = [];
    for (let j = 0; j < this.operator.cols; j++) {
      if (this.coefficients[2 * j] !== 0 || this.coefficients[2 * j + 1] !== 0) indices.push(j);
    }
    const values = new Float64Array(2 * indices.length);
    indices.forEach((j, i) => {
      values[2 * i] = this.coefficients[2 * j]!;
      values[2 * i + 1] = this.coefficients[2 * j + 1]!;
    });
    return { indices: Uint32Array.from(indices), values };
  }

  burst(frames: number, factor = DEFAULT_BURST_FACTOR): void {
    this.#burstLeft = Math.max(this.#burstLeft, Math.max(0, Math.floor(frames)));
    this.#burstFactor = factor;
  }

  /** Sets the coefficients for frame number `frame` (0-based). */
  protected abstract evolve(frame: number): void;

  /** A standard normal draw (Box–Muller on two genrand_res53 draws, the cosine branch first). */
  protected gaussian(): number {
    if (this.#spareGaussian !== null) {
      const spare = this.#spareGaussian;
      this.#spareGaussian = null;
      return spare;
    }
    const u1 = 1 - this.random.nextDouble(); // (0, 1]: the logarithm stays finite
    const u2 = this.random.nextDouble();
    const r = Math.sqrt(-2 * Math.log(u1));
    this.#spareGaussian = r * Math.sin(2 * Math.PI * u2);
    return r * Math.cos(2 * Math.PI * u2);
  }
}
