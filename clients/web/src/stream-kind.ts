/**
 * What a stream's recovery looks like, read from its declared operator: a spectrum (coefficients
 * over frequency), a delay-Doppler grid (Gabor), or a signal over time (a sparsity basis).
 * PROVISIONAL until operators/ documents its descriptions.
 */
import type { StreamDeclaration } from '../../../protocol/messages.js';
import type { DelayDopplerGrid } from './delay-doppler.js';

export type RecoveryShape =
  | { kind: 'spectrum'; bins: number; summary: string }
  | { kind: 'delay_doppler'; grid: DelayDopplerGrid; summary: string }
  | { kind: 'signal'; samples: number; basis: string; summary: string }
  | { kind: 'coefficients'; summary: string };

export function recoveryShape(declaration: StreamDeclaration): RecoveryShape {
  const op = declaration.operator as Record<string, unknown>;
  const kind = typeof op.kind === 'string' ? op.kind : '';
  const n = typeof op.n === 'number' ? op.n : 0;
  if (kind.includes('gabor')) {
    return { kind: 'delay_doppler', grid: { delays: n, dopplerFrom: 0, dopplerTo: n - 1 }, summary: kind };
  }
  if (kind.includes('dft') || kind.includes('fourier')) return { kind: 'spectrum', bins: n, summary: kind };
  if (n > 0) return { kind: 'signal', samples: n, basis: String(op.basis ?? ''), summary: kind };
  return { kind: 'coefficients', summary: kind };
}
