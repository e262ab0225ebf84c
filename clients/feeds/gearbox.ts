import type { StreamDeclaration } from '../../protocol/index.js';
import { RESIDUAL_ALERT, SyntheticFeed, type FeedOptions } from './synthetic.js';

/**
 * A gearbox test stand. Its vibration node sends m random time samples out of each window of n
 * (the same seeded pattern every frame); the spectrum holds a few machine tones: the shaft
 * frequency and two harmonics, and a gear-mesh tone that wanders slowly over neighbouring bins.
 * Amplitudes breathe slowly and every tone's phase advances from frame to frame.
 */
export interface GearboxOptions extends FeedOptions {
  /** Window length (default 512). */
  n?: number;
  /** Time samples per window (default 96). */
  m?: number;
  /** Seed of the sample pattern (default 21). */
  patternSeed?: number;
}

interface Tone {
  bin: number;
  amplitude: number;
  /** Phase advance per frame, radians. */
  spin: number;
}

export class GearboxFeed extends SyntheticFeed {
  readonly kind = 'gearbox';
  readonly framesPerSecond = 20;
  readonly #tones: Tone[];
  readonly #meshHome: number;

  constructor(options: GearboxOptions = {}) {
    const n = options.n ?? 512;
    const m = options.m ?? 96;
    const declaration: StreamDeclaration = {
      name: options.name ?? 'gearbox.vibration',
      operator: { kind: 'sampling', n, samples: { law: 'uniform', m, seed: options.patternSeed ?? 21 }, basis: { kind: 'dft' } },
      solver: { method: 'omp', sparsity: 8 },
      noise_sigma: 0.002,
      alerts: [RESIDUAL_ALERT],
      queue: { capacity: 32, policy: 'drop_oldest' },
      note: 'gearbox test stand, accelerometer on the output bearing',
    };
    super(declaration, options.seed ?? 1);
    const shaft = Math.round(n / 30);
    this.#meshHome = Math.round(n / 5.5);
    this.#tones = [
      { bin: shaft, amplitude: 1.0, spin: 0.11 },
      { bin: 2 * shaft, amplitude: 0.55, spin: 0.23 },
      { bin: 3 * shaft, amplitude: 0.3, spin: 0.31 },
      { bin: this.#meshHome, amplitude: 0.7, spin: 0.05 },
    ];
  }

  /** The tones' DFT bins on the latest frame. */
  toneBins(): number[] {
    return this.#tones.map((t) => t.bin);
  }

  protected evolve(frame: number): void {
    const c = this.coefficients;
    for (const tone of this.#tones) (c[2 * tone.bin] = 0), (c[2 * tone.bin + 1] = 0);
    // The mesh tone wanders ±2 bins around home, one bin every 150 frames.
    const step = Math.floor(frame / 150) % 8;
    this.#tones[3]!.bin = this.#meshHome + (step < 4 ? step : 8 - step) - 2;
    for (const [i, tone] of this.#tones.entries()) {
      const amplitude = tone.amplitude * (1 + 0.2 * Math.sin((2 * Math.PI * frame) / 400 + i));
      const phase = tone.spin * frame + i;
      c[2 * tone.bin] = amplitude * Math.cos(phase);
      c[2 * tone.bin + 1] = amplitude * Math.sin(phase);
    }
  }
}
