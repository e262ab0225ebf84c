import type { StreamDeclaration } from '../../protocol/index.js';
import { RESIDUAL_ALERT, SyntheticFeed, type FeedOptions } from './synthetic.js';

/**
 * A delay-Doppler test range. A probe with random phases (a Steinhaus window) goes out every
 * frame; the response holds a few reflectors, each a delay and a Doppler shift on the Gabor grid.
 * Reflectors move: their delays creep by one bin every so many frames, at a speed that matches
 * the sign of their Doppler shift.
 */
export interface RangeOptions extends FeedOptions {
  /** Probe length n (default 64). */
  n?: number;
  /** Delays 0..delays−1 on the grid (default 16). */
  delays?: number;
  /** Doppler bins dopplerFrom..dopplerTo (default −8..7). */
  dopplerFrom?: number;
  dopplerTo?: number;
  /** Seed of the probe window (default 5). */
  windowSeed?: number;
}

/** Where a reflector is on the latest frame. */
export interface Reflector {
  delay: number;
  doppler: number;
  /** Complex amplitude. */
  re: number;
  im: number;
  /** Its column in the operator: delay·L + (doppler − dopplerFrom). */
  column: number;
}

interface Mover {
  delay: number;
  doppler: number;
  amplitude: number;
  phase: number;
  /** Frames per delay bin moved (0 = still). */
  framesPerBin: number;
}

export class RangeFeed extends SyntheticFeed {
  readonly kind = 'range';
  readonly framesPerSecond = 10;
  readonly delays: number;
  readonly dopplerFrom: number;
  readonly dopplerTo: number;
  readonly #movers: Mover[];
  #reflectors: Reflector[] = [];

  constructor(options: RangeOptions = {}) {
    const n = options.n ?? 64;
    const delays = options.delays ?? 16;
    const dopplerFrom = options.dopplerFrom ?? -8;
    const dopplerTo = options.dopplerTo ?? 7;
    const declaration: StreamDeclaration = {
      name: options.name ?? 'range.delay-doppler',
      operator: { kind: 'gabor', n, window: { kind: 'steinhaus', seed: options.windowSeed ?? 5 }, grid: { delays, dopplerFrom, dopplerTo } },
      solver: { method: 'omp', sparsity: 6 },
      noise_sigma: 0.002,
      alerts: [RESIDUAL_ALERT],
      queue: { capacity: 16, policy: 'keep_latest' },
      note: 'test range, random-phase probe, three reflectors',
    };
    super(declaration, options.seed ?? 2);
    this.delays = delays;
    this.dopplerFrom = dopplerFrom;
    this.dopplerTo = dopplerTo;
    this.#movers = [
      { delay: 2, doppler: -3, amplitude: 1.0, phase: 0.3, framesPerBin: 60 },
      { delay: Math.floor(delays / 2), doppler: 2, amplitude: 0.8, phase: 1.9, framesPerBin: 90 },
      { delay: delays - 3, doppler: 0, amplitude: 0.6, phase: -1.2, framesPerBin: 0 },
    ];
  }

  /** The reflectors behind the frame last produced. */
  reflectors(): Reflector[] {
    return this.#reflectors.map((r) => ({ ...r }));
  }

  protected evolve(frame: number): void {
    const c = this.coefficients;
    for (const r of this.#reflectors) (c[2 * r.column] = 0), (c[2 * r.column + 1] = 0);
    const L = this.dopplerTo - this.dopplerFrom + 1;
    this.#reflectors = this.#movers.map((mover) => {
      // Approaching (negative Doppler) reflectors come closer, receding ones move away.
      const moved = mover.framesPerBin > 0 ? Math.sign(mover.doppler) * Math.floor(frame / mover.framesPerBin) : 0;
      const delay = (((mover.delay + moved) % this.delays) + this.delays) % this.delays;
      const phase = mover.phase + 0.07 * frame * (1 + mover.doppler / 8);
      const column = delay * L + (mover.doppler - this.dopplerFrom);
      const reflector = { delay, doppler: mover.doppler, re: mover.amplitude * Math.cos(phase), im: mover.amplitude * Math.sin(phase), column };
      c[2 * column] = reflector.re;
      c[2 * column + 1] = reflector.im;
      return reflector;
    });
  }
}
