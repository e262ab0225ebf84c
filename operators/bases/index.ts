import type { UnitaryBasis } from '../types.js';
import { Dct2Basis } from './dct2.js';
import { DftBasis } from './dft.js';
import { IdentityBasis } from './identity.js';
import { DB4_FILTER, HAAR_FILTER, PeriodicWaveletBasis, twoAdicValuation } from './wavelet.js';

export type BasisKind = 'identity' | 'dft' | 'dct2' | 'haar' | 'db4';

/**
 * Wavelet depth when none is given: Haar decomposes fully (every factor of two of n, down to
 * n/2^L samples); Daubechies-4 stops two levels earlier so the coarsest level keeps at least
 * four samples (its filter length) whenever n allows, and always does at least one level.
 */
export function defaultWaveletLevels(kind: 'haar' | 'db4', n: number): number {
  const v = twoAdicValuation(n);
  return kind === 'haar' ? v : Math.max(1, v - 2);
}

/** The unitary basis of the given kind and size (levels only for haar/db4). */
export function makeBasis(kind: BasisKind, n: number, levels?: number): UnitaryBasis {
  switch (kind) {
    case 'identity':
      return new IdentityBasis(n);
    case 'dft':
      return new DftBasis(n);
    case 'dct2':
      return new Dct2Basis(n);
    case 'haar':
      return new PeriodicWaveletBasis(n, levels ?? defaultWaveletLevels(kind, n), HAAR_FILTER);
    case 'db4':
      return new PeriodicWaveletBasis(n, levels ?? defaultWaveletLevels(kind, n), DB4_FILTER);
  }
}

export { Dct2Basis, DftBasis, IdentityBasis, PeriodicWaveletBasis, DB4_FILTER, HAAR_FILTER };
