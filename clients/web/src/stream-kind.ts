/**
 * What a stream's recovery looks like, read from its declared operator description
 * (docs/operators.md): a spectrum when the unknowns are DFT coefficients, a delay-Doppler grid
 * for a Gabor operator, and otherwise a signal over time (synthesised from its basis). The
 * declaration reaches the page unchecked beyond the protocol envelope (the daemon validated it
 * with the operator parser), so this reads it defensively and falls back to plain coefficients.
 */
import { sampleIndices } from '../../../operators/build.js';
import { parseOperatorDescription } from '../../../operators/description.js';
import type { StreamDeclaration } from '../../../protocol/messages.js';
import type { DelayDopplerGrid } from './delay-doppler.js';

export type RecoveryShape =
  /** sampleTimes: when the measurements are time samples, the time of each, in measurement order. */
  | { kind: 'spectrum'; bins: number; sampleTimes: Uint32Array | null; summary: string }
  | { kind: 'delay_doppler'; grid: DelayDopplerGrid; summary: string }
  | { kind: 'signal'; samples: number; basis: string; sampleTimes: Uint32Array | null; summary: string }
  | { kind: 'coefficients'; summary: string };

const BASIS_NAMES: Readonly<Record<string, string>> = {
  identity: 'identity',
  dft: 'DFT',
  dct2: 'DCT-II',
  haar: 'Haar',
  db4: 'Daubechies-4',
};

type Description = Record<string, unknown>;

function record(v: unknown): Description | null {
  return v !== null && typeof v === 'object' && !Array.isArray(v) ? (v as Description) : null;
}

function positiveInt(v: unknown): number | null {
  return typeof v === 'number' && Number.isInteger(v) && v > 0 ? v : null;
}

function integer(v: unknown): number | null {
  return typeof v === 'number' && Number.isInteger(v) ? v : null;
}

function describeSamples(samples: Description | null, n: number, what: string): string {
  if (!samples) return what;
  if (samples.law === 'explicit' && Array.isArray(samples.indices)) return `${samples.indices.length} of ${n} ${what} (listed)`;
  const m = positiveInt(samples.m);
  const law = samples.law === 'variable_density' ? 'variable density' : String(samples.law);
  return `${m ?? '?'} of ${n} ${what} (${law}, seed ${String(samples.seed)})`;
}

/**
 * Time index of each measurement of a `sampling` operator, in measurement order (y_i was taken
 * at time sampleTimes[i]). Seeded sample sets are re-derived with the operators' own code, the
 * same derivation the daemon builds the operator with (docs/operators.md).
 */
function sampleTimesOf(raw: Description): Uint32Array | null {
  if (raw.kind !== 'sampling') return null;
  try {
    const desc = parseOperatorDescription(raw);
    return desc.kind === 'sampling' ? Uint32Array.from(sampleIndices(desc.samples, desc.n)) : null;
  } catch {
    return null; // the daemon accepted it, so this page is older or newer than the daemon: draw without
  }
}

export function recoveryShape(declaration: StreamDeclaration): RecoveryShape {
  const desc = record(declaration.operator) ?? {};
  const solver = record(declaration.solver);
  const method = typeof solver?.method === 'string' ? ` · solver ${solver.method}` : '';

  if (desc.kind === 'gabor') {
    const n = positiveInt(desc.n);
    if (n === null) return { kind: 'coefficients', summary: `Gabor operator${method}` };
    const grid = record(desc.grid);
    const delays = positiveInt(grid?.delays);
    const from = integer(grid?.dopplerFrom);
    const to = integer(grid?.dopplerTo);
    // Without a grid the operator spans the full n × n grid (docs/operators.md).
    const shape: DelayDopplerGrid =
      delays !== null && from !== null && to !== null && to >= from
        ? { delays, dopplerFrom: from, dopplerTo: to }
        : { delays: n, dopplerFrom: 0, dopplerTo: n - 1 };
    const window = record(desc.window);
    return {
      kind: 'delay_doppler',
      grid: shape,
      summary: `Gabor probe of length ${n} (${String(window?.kind ?? '?')} window) · ${shape.delays} delays × Doppler ${shape.dopplerFrom}..${shape.dopplerTo}${method}`,
    };
  }

  let size: number | null = null;
  let measured = '';
  switch (desc.kind) {
    case 'sampling':
      size = positiveInt(desc.n);
      measured = describeSamples(record(desc.samples), size ?? 0, 'time samples');
      break;
    case 'partial_dft':
      size = positiveInt(desc.n);
      measured = describeSamples(record(desc.samples), size ?? 0, 'DFT bins');
      break;
    case 'gaussian':
    case 'bernoulli':
    case 'matrix':
      size = positiveInt(desc.cols);
      measured = `${String(desc.rows)} ${desc.kind === 'matrix' ? 'listed' : String(desc.kind)} projections of ${size ?? '?'} samples`;
      break;
  }
  if (size === null) return { kind: 'coefficients', summary: `operator ${String(desc.kind ?? 'unknown')}${method}` };
  const basisKind = String(record(desc.basis)?.kind ?? 'identity');
  const basis = BASIS_NAMES[basisKind] ?? basisKind;
  const summary = `${measured} · sparse in the ${basis} basis${method}`;
  const sampleTimes = sampleTimesOf(desc);
  if (basisKind === 'dft') return { kind: 'spectrum', bins: size, sampleTimes, summary };
  return { kind: 'signal', samples: size, basis, sampleTimes, summary };
}
