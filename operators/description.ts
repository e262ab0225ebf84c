/**
 * The operator description: one JSON-serialisable object that says how to build a
 * measurement operator (it travels inside a stream declaration). Parsing checks the shape
 * with zod, then the rules that tie fields together (m ≤ n, indices in range and unique,
 * window length n, basis fits n, …). Every failure throws OperatorDescriptionError whose
 * `field` is the path of the offending value ("samples.indices[3]") and whose message
 * starts with that path and says what is wrong.
 */
import { z } from 'zod';
import { twoAdicValuation } from './bases/wavelet.js';

/** Size limits (see docs/operators.md). */
export const LIMITS = {
  /** Signal length n of sampling / partial DFT operators, and either side of a dense matrix. */
  maxSize: 65536,
  /** Signal length n of Gabor operators (the full grid has n² columns). */
  maxGaborSize: 1024,
  /** rows · cols of dense matrices (Gaussian, Bernoulli, explicit). */
  maxDenseEntries: 2 ** 22,
  /** Variable-density decay exponent. */
  maxDecay: 16,
  /** Wavelet levels. */
  maxLevels: 16,
} as const;

export class OperatorDescriptionError extends Error {
  constructor(
    readonly field: string,
    problem: string,
  ) {
    super(`${field === '' ? 'operator description' : field}: ${problem}`);
    this.name = 'OperatorDescriptionError';
  }
}

const size = (max: number) => z.number().int().min(1).max(max);
const seed = z.number().int().min(0).max(2 ** 32 - 1);
const finiteNumbers = (max: number) => z.array(z.number()).max(max);

const sampleSetSchema = z.discriminatedUnion('law', [
  z.strictObject({ law: z.literal('uniform'), m: size(LIMITS.maxSize), seed }),
  z.strictObject({
    law: z.literal('variable_density'),
    m: size(LIMITS.maxSize),
    seed,
    decay: z.number().min(0).max(LIMITS.maxDecay).optional(),
  }),
  z.strictObject({
    law: z.literal('explicit'),
    indices: z.array(z.number().int().min(0).max(LIMITS.maxSize - 1)).min(1).max(LIMITS.maxSize),
  }),
]);

const basisSchema = z.strictObject({
  kind: z.enum(['identity', 'dft', 'dct2', 'haar', 'db4']),
  levels: z.number().int().min(1).max(LIMITS.maxLevels).optional(),
});

const windowSchema = z.discriminatedUnion('kind', [
  z.strictObject({ kind: z.literal('steinhaus'), seed }),
  z.strictObject({ kind: z.literal('rademacher'), seed }),
  z.strictObject({ kind: z.literal('gaussian'), seed }),
  z.strictObject({
    kind: z.literal('explicit'),
    re: finiteNumbers(LIMITS.maxGaborSize),
    im: finiteNumbers(LIMITS.maxGaborSize).optional(),
  }),
]);

const gridSchema = z.strictObject({
  delays: size(LIMITS.maxGaborSize),
  dopplerFrom: z.number().int(),
  dopplerTo: z.number().int(),
});

const denseShape = {
  rows: size(LIMITS.maxSize),
  cols: size(LIMITS.maxSize),
  basis: basisSchema.optional(),
};

const descriptionSchema = z.discriminatedUnion('kind', [
  z.strictObject({
    kind: z.literal('sampling'),
    n: size(LIMITS.maxSize),
    samples: sampleSetSchema,
    basis: basisSchema.optional(),
  }),
  z.strictObject({
    kind: z.literal('partial_dft'),
    n: size(LIMITS.maxSize),
    samples: sampleSetSchema,
    basis: basisSchema.optional(),
  }),
  z.strictObject({
    kind: z.literal('gabor'),
    n: size(LIMITS.maxGaborSize),
    window: windowSchema,
    grid: gridSchema.optional(),
  }),
  z.strictObject({ kind: z.literal('gaussian'), ...denseShape, seed }),
  z.strictObject({ kind: z.literal('bernoulli'), ...denseShape, seed }),
  z.strictObject({
    kind: z.literal('matrix'),
    ...denseShape,
    re: finiteNumbers(LIMITS.maxDenseEntries),
    im: finiteNumbers(LIMITS.maxDenseEntries).optional(),
  }),
]);

export type OperatorDescription = z.infer<typeof descriptionSchema>;
export type SampleSet = z.infer<typeof sampleSetSchema>;
export type Basis = z.infer<typeof basisSchema>;
export type Window = z.infer<typeof windowSchema>;
export type GaborGridDescription = z.infer<typeof gridSchema>;

/** Descriptions returned by parseOperatorDescription, so buildOperator need not check them again. */
const validated = new WeakSet<object>();

export function isValidatedDescription(desc: object): boolean {
  return validated.has(desc);
}

/** Check a raw value (e.g. decoded JSON) and return it as a typed description, or throw OperatorDescriptionError. */
export function parseOperatorDescription(raw: unknown): OperatorDescription {
  const result = descriptionSchema.safeParse(raw);
  if (!result.success) {
    const issue = result.error.issues[0]!;
    const fieldPath = issue.code === 'unrecognized_keys' ? [...issue.path, issue.keys[0]!] : issue.path;
    throw new OperatorDescriptionError(formatPath(fieldPath), describeIssue(issue, valueAt(raw, issue.path)));
  }
  const desc = result.data;
  checkConsistency(desc);
  validated.add(desc);
  return desc;
}

function formatPath(path: readonly PropertyKey[]): string {
  let out = '';
  for (const key of path) {
    if (typeof key === 'number') out += `[${key}]`;
    else out += out === '' ? String(key) : `.${String(key)}`;
  }
  return out;
}

function valueAt(raw: unknown, path: readonly PropertyKey[]): unknown {
  let v = raw;
  for (const key of path) {
    if (v === null || typeof v !== 'object') return undefined;
    v = (v as Record<PropertyKey, unknown>)[key];
  }
  return v;
}

function show(value: unknown): string {
  if (typeof value === 'number') return String(value);
  if (typeof value === 'string') return JSON.stringify(value.length > 40 ? `${value.slice(0, 40)}…` : value);
  if (Array.isArray(value)) return `an array of ${value.length}`;
  if (value === null) return 'null';
  return typeof value;
}

function describeIssue(issue: z.core.$ZodIssue, value: unknown): string {
  switch (issue.code) {
    case 'invalid_type':
      if (value === undefined) return 'is required';
      if (typeof value === 'number' && !Number.isFinite(value)) return `must be a finite number, got ${value}`;
      if (issue.expected === 'int') return `must be an integer, got ${show(value)}`;
      return `must be ${issue.expected === 'object' ? 'an object' : `a ${issue.expected}`}, got ${show(value)}`;
    case 'too_small':
      if (issue.origin === 'array') return `must have at least ${issue.minimum} entries, got ${show(value)}`;
      return `must be at least ${issue.minimum}, got ${show(value)}`;
    case 'too_big':
      if (issue.origin === 'array') return `must have at most ${issue.maximum} entries, got ${show(value)}`;
      return `must be at most ${issue.maximum}, got ${show(value)}`;
    case 'invalid_union':
      if ('options' in issue && Array.isArray(issue.options)) {
        return `must be one of ${issue.options.map((o) => JSON.stringify(o)).join(', ')}, got ${show(value)}`;
      }
      return issue.message;
    case 'invalid_value':
      return `must be one of ${issue.values.map((o) => JSON.stringify(o)).join(', ')}, got ${show(value)}`;
    case 'unrecognized_keys':
      return 'is not a field of this description';
    default:
      return issue.message;
  }
}

function fail(field: string, problem: string): never {
  throw new OperatorDescriptionError(field, problem);
}

/** The rules zod's per-field shapes cannot express. */
function checkConsistency(desc: OperatorDescription): void {
  switch (desc.kind) {
    case 'sampling':
    case 'partial_dft':
      checkSampleSet(desc.samples, desc.n);
      checkBasis(desc.basis, desc.n, 'n');
      return;
    case 'gabor':
      checkWindow(desc.window, desc.n);
      if (desc.grid) checkGrid(desc.grid, desc.n);
      return;
    case 'gaussian':
    case 'bernoulli':
    case 'matrix':
      checkDense(desc);
      return;
  }
}

function checkSampleSet(samples: SampleSet, n: number): void {
  if (samples.law !== 'explicit') {
    if (samples.m > n) fail('samples.m', `${samples.m} samples exceed n = ${n}`);
    return;
  }
  if (samples.indices.length > n) fail('samples.indices', `${samples.indices.length} indices exceed n = ${n}`);
  const firstSeen = new Int32Array(n).fill(-1);
  samples.indices.forEach((index, i) => {
    if (index >= n) fail(`samples.indices[${i}]`, `index ${index} is outside 0..${n - 1}`);
    if (firstSeen[index]! >= 0) {
      fail(`samples.indices[${i}]`, `index ${index} repeats samples.indices[${firstSeen[index]}]`);
    }
    firstSeen[index] = i;
  });
}

function checkBasis(basis: Basis | undefined, n: number, sizeField: string): void {
  if (!basis) return;
  const isWavelet = basis.kind === 'haar' || basis.kind === 'db4';
  if (!isWavelet) {
    if (basis.levels !== undefined) fail('basis.levels', `applies only to haar and db4, not ${basis.kind}`);
    return;
  }
  if (basis.levels === undefined) {
    if (n % 2 !== 0) {
      fail('basis.kind', `${basis.kind} needs an even ${sizeField} (a power of two, or a multiple of 2^levels), got ${n}`);
    }
    return;
  }
  const maxLevels = twoAdicValuation(n);
  if (basis.levels > maxLevels) {
    fail(
      'basis.levels',
      `${basis.kind} with ${basis.levels} levels needs ${sizeField} divisible by 2^${basis.levels} = ${2 ** basis.levels}; ` +
        `${sizeField} = ${n} allows at most ${maxLevels} (a power of two allows log2(${sizeField}))`,
    );
  }
}

function checkWindow(window: Window, n: number): void {
  if (window.kind !== 'explicit') return;
  if (window.re.length !== n) fail('window.re', `has ${window.re.length} entries, the window length must be n = ${n}`);
  if (window.im !== undefined && window.im.length !== n) {
    fail('window.im', `has ${window.im.length} entries, the window length must be n = ${n}`);
  }
  checkEnergy('window.', window.re, window.im, 'a Gabor window needs some energy');
}

/**
 * Energy (sum of squares of the entries) accepted for explicit windows and matrices: 2^-1000 to
 * 2^1000. Outside it the window normalisation, the norm bound or the solvers' step size (which
 * divides by the bound squared) underflow or overflow to 0, NaN or Infinity, and no solver can
 * use the operator.
 */
const MIN_ENERGY = 2 ** -1000;
const MAX_ENERGY = 2 ** 1000;

/** `prefix` + 're' or 'im', whichever holds the entry of largest magnitude, is named in the error. */
function checkEnergy(prefix: string, re: number[], im: number[] | undefined, why: string): void {
  let energy = 0;
  for (const v of re) energy += v * v;
  for (const v of im ?? []) energy += v * v;
  const peak = (values: number[]) => values.reduce((m, v) => Math.max(m, Math.abs(v)), 0);
  const field = `${prefix}${peak(im ?? []) > peak(re) ? 'im' : 're'}`;
  if (energy === 0 && re.every((v) => v === 0) && (im ?? []).every((v) => v === 0)) fail(prefix === '' ? 're' : prefix.slice(0, -1), `is all zero; ${why}`);
  if (!(energy >= MIN_ENERGY)) fail(field, 'is too small: the sum of squares of the entries is below 2^-1000; scale them up');
  if (!(energy <= MAX_ENERGY)) fail(field, 'has entries too large: the sum of squares of the entries exceeds 2^1000; scale them down');
}

function checkGrid(grid: GaborGridDescription, n: number): void {
  if (grid.delays > n) fail('grid.delays', `${grid.delays} delays exceed n = ${n}`);
  if (grid.dopplerFrom <= -n || grid.dopplerFrom >= n) {
    fail('grid.dopplerFrom', `must lie in ${-(n - 1)}..${n - 1}, got ${grid.dopplerFrom}`);
  }
  if (grid.dopplerTo <= -n || grid.dopplerTo >= n) {
    fail('grid.dopplerTo', `must lie in ${-(n - 1)}..${n - 1}, got ${grid.dopplerTo}`);
  }
  if (grid.dopplerTo < grid.dopplerFrom) {
    fail('grid.dopplerTo', `${grid.dopplerTo} is below grid.dopplerFrom = ${grid.dopplerFrom}`);
  }
  const bins = grid.dopplerTo - grid.dopplerFrom + 1;
  if (bins > n) fail('grid.dopplerTo', `the range ${grid.dopplerFrom}..${grid.dopplerTo} has ${bins} bins, more than n = ${n}`);
}

function checkDense(desc: Extract<OperatorDescription, { rows: number }>): void {
  const entries = desc.rows * desc.cols;
  if (entries > LIMITS.maxDenseEntries) {
    fail('cols', `rows·cols = ${entries} exceeds the limit of ${LIMITS.maxDenseEntries} entries`);
  }
  if (desc.kind === 'matrix') {
    if (desc.re.length !== entries) fail('re', `has ${desc.re.length} entries, rows·cols = ${entries} (row-major)`);
    if (desc.im !== undefined && desc.im.length !== entries) {
      fail('im', `has ${desc.im.length} entries, rows·cols = ${entries} (row-major)`);
    }
    checkEnergy('', desc.re, desc.im, 'a measurement matrix needs some nonzero entry');
  }
  checkBasis(desc.basis, desc.cols, 'cols');
}
