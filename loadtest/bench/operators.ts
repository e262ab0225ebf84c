/**
 * Operator benchmarks: each figure is the time of an operator call over a floor of raw
 * fft.js transforms measured in the same run. Floor and subject run in alternating short
 * batches (about a millisecond each) over many rounds; each side's time is its 10th
 * percentile over the rounds, which measures the code rather than the moments other
 * processes took the core (this 2-core machine is shared), and the figure is their ratio.
 * The table also shows the median of the per-round ratios, which includes that interference.
 *
 *   npm run bench -- operators [--json] [--rounds N]
 */
import FFT from 'fft.js';
import {
  buildOperator,
  fftPlan,
  makeBasis,
  MT19937,
  type LinearOperator,
  type UnitaryBasis,
} from '../../operators/index.js';
import { quantile, timeBatch } from './support/timing.js';

interface Comparison {
  name: string;
  what: string;
  floorWhat: string;
  /** Calls per batch so that one batch takes a few milliseconds. */
  batch: number;
  subject: () => void;
  floor: () => void;
  target?: number;
}

interface Measured {
  comparison: Comparison;
  subjectMicros: number;
  floorMicros: number;
  /** subject over floor, each at its 10th percentile over the rounds. */
  ratio: number;
  /** median of the per-round ratios. */
  medianRatio: number;
}

function randomVector(length: number, seed: number): Float64Array {
  const rng = new MT19937(seed);
  const v = new Float64Array(length);
  for (let i = 0; i < length; i++) v[i] = 2 * rng.nextDouble() - 1;
  return v;
}

function measure(c: Comparison, rounds: number): Measured {
  for (let i = 0; i < 20; i++) {
    timeBatch(c.floor, c.batch);
    timeBatch(c.subject, c.batch);
  }
  const subject: number[] = [];
  const floor: number[] = [];
  const ratios: number[] = [];
  for (let r = 0; r < rounds; r++) {
    const f = timeBatch(c.floor, c.batch);
    const s = timeBatch(c.subject, c.batch);
    floor.push(f);
    subject.push(s);
    ratios.push(s / f);
  }
  const subjectMicros = quantile(subject, 0.1);
  const floorMicros = quantile(floor, 0.1);
  return { comparison: c, subjectMicros, floorMicros, ratio: subjectMicros / floorMicros, medianRatio: quantile(ratios, 0.5) };
}

/** Raw fft.js forward transforms of length n, `count` per call, on Float64Arrays. */
function fftFloor(n: number, count: number): () => void {
  const fft = new FFT(n);
  const input = randomVector(2 * n, n);
  const out = new Float64Array(2 * n);
  return () => {
    for (let i = 0; i < count; i++) fft.transform(out, input);
  };
}

function applyAndAdjoint(op: LinearOperator): () => void {
  const x = randomVector(2 * op.cols, 1);
  const y = new Float64Array(2 * op.rows);
  const back = new Float64Array(2 * op.cols);
  return () => {
    op.apply(x, y);
    op.adjoint(y, back);
  };
}

function analyzeAndSynthesize(basis: UnitaryBasis): () => void {
  const x = randomVector(2 * basis.size, 2);
  const c = new Float64Array(2 * basis.size);
  const back = new Float64Array(2 * basis.size);
  return () => {
    basis.analyze(x, c);
    basis.synthesize(c, back);
  };
}

function comparisons(): Comparison[] {
  const n = 4096;
  const partialDft = buildOperator({ kind: 'partial_dft', n, samples: { law: 'uniform', m: n / 4, seed: 1 } });
  const spectral = buildOperator({ kind: 'sampling', n, samples: { law: 'uniform', m: n / 4, seed: 1 }, basis: { kind: 'dft' } });
  const gaborN = 128;
  const gabor = buildOperator({ kind: 'gabor', n: gaborN, window: { kind: 'steinhaus', seed: 1 } });
  const gc = randomVector(2 * gabor.cols, 3);
  const gy = new Float64Array(2 * gabor.rows);
  const gyIn = randomVector(2 * gabor.rows, 4);
  const gcOut = new Float64Array(2 * gabor.cols);
  const bluestein = fftPlan(300);
  const bx = randomVector(600, 5);
  const bout = new Float64Array(600);
  return [
    {
      name: 'dft_apply_over_fft',
      what: `partial DFT n=${n} m=${n / 4}: apply + adjoint`,
      floorWhat: `2 fft.js transforms n=${n}`,
      batch: 12,
      subject: applyAndAdjoint(partialDft),
      floor: fftFloor(n, 2),
      target: 1.3,
    },
    {
      name: 'sampling_dft_apply_over_fft',
      what: `time samples, DFT basis n=${n} m=${n / 4}: apply + adjoint`,
      floorWhat: `2 fft.js transforms n=${n}`,
      batch: 12,
      subject: applyAndAdjoint(spectral),
      floor: fftFloor(n, 2),
      target: 1.3,
    },
    {
      name: 'gabor_apply_over_fft_floor',
      what: `Gabor full grid n=${gaborN}: apply`,
      floorWhat: `${gaborN} fft.js transforms n=${gaborN}`,
      batch: 6,
      subject: () => gabor.apply(gc, gy),
      floor: fftFloor(gaborN, gaborN),
      target: 1.5,
    },
    {
      name: 'gabor_adjoint_over_fft_floor',
      what: `Gabor full grid n=${gaborN}: adjoint`,
      floorWhat: `${gaborN} fft.js transforms n=${gaborN}`,
      batch: 6,
      subject: () => gabor.adjoint(gyIn, gcOut),
      floor: fftFloor(gaborN, gaborN),
      target: 1.5,
    },
    {
      name: 'dct2_over_fft',
      what: `DCT-II n=${n}: analyze + synthesize`,
      floorWhat: `2 fft.js transforms n=${n}`,
      batch: 8,
      subject: analyzeAndSynthesize(makeBasis('dct2', n)),
      floor: fftFloor(n, 2),
    },
    {
      name: 'haar_over_fft',
      what: `Haar n=${n} (12 levels): analyze + synthesize`,
      floorWhat: `2 fft.js transforms n=${n}`,
      batch: 8,
      subject: analyzeAndSynthesize(makeBasis('haar', n)),
      floor: fftFloor(n, 2),
    },
    {
      name: 'bluestein_300_over_fft_512',
      what: 'Bluestein DFT n=300: forward',
      floorWhat: '1 fft.js transform n=512',
      batch: 40,
      subject: () => bluestein.forward(bx, bout),
      floor: fftFloor(512, 1),
    },
  ];
}

function formatTable(results: Measured[]): string {
  const header = ['figure', 'operator call', 'µs', 'floor', 'µs', 'ratio', 'median ratio', 'target'];
  const rows = results.map((r) => [
    r.comparison.name,
    r.comparison.what,
    r.subjectMicros.toFixed(1),
    r.comparison.floorWhat,
    r.floorMicros.toFixed(1),
    r.ratio.toFixed(3),
    r.medianRatio.toFixed(3),
    r.comparison.target === undefined ? '-' : `≤ ${r.comparison.target}${r.ratio <= r.comparison.target ? '' : '  MISSED'}`,
  ]);
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((row) => row[i]!.length)));
  const line = (cells: string[]) => cells.map((c, i) => c.padEnd(widths[i]!)).join('  ').trimEnd();
  return [line(header), line(widths.map((w) => '-'.repeat(w))), ...rows.map(line)].join('\n');
}

export async function run(args: string[]): Promise<{ table: string; figures: Record<string, number> }> {
  const roundsAt = args.indexOf('--rounds');
  const rounds = roundsAt >= 0 ? Number(args[roundsAt + 1]) : 151;
  if (!Number.isInteger(rounds) || rounds < 1) throw new Error(`--rounds must be a positive integer, got ${args[roundsAt + 1]}`);
  const results = comparisons().map((c) => measure(c, rounds));
  const figures: Record<string, number> = {};
  for (const r of results) figures[r.comparison.name] = Number(r.ratio.toFixed(4));
  return { table: formatTable(results), figures };
}
