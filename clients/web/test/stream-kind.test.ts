import { describe, expect, it } from 'vitest';
import { drawUniformIndices } from '../../../operators/derivations.js';
import type { StreamDeclaration } from '../../../protocol/messages.js';
import { recoveryShape } from '../src/stream-kind.js';

const declare = (operator: Record<string, unknown>): StreamDeclaration => ({ name: 's', operator, solver: { method: 'fista' } });

describe('recoveryShape', () => {
  it('draws a Gabor stream on its declared grid, or on the full n × n grid without one (docs/operators.md)', () => {
    const window = { kind: 'steinhaus', seed: 1 };
    expect(recoveryShape(declare({ kind: 'gabor', n: 32, window }))).toMatchObject({
      kind: 'delay_doppler',
      grid: { delays: 32, dopplerFrom: 0, dopplerTo: 31 },
    });
    expect(recoveryShape(declare({ kind: 'gabor', n: 32, window, grid: { delays: 8, dopplerFrom: -3, dopplerTo: 3 } }))).toMatchObject({
      kind: 'delay_doppler',
      grid: { delays: 8, dopplerFrom: -3, dopplerTo: 3 },
    });
  });

  it('draws a spectrum when the unknowns are DFT coefficients, a signal otherwise', () => {
    const samples = { law: 'uniform', m: 16, seed: 4 };
    expect(recoveryShape(declare({ kind: 'sampling', n: 64, samples, basis: { kind: 'dft' } }))).toMatchObject({ kind: 'spectrum', bins: 64 });
    expect(recoveryShape(declare({ kind: 'sampling', n: 64, samples, basis: { kind: 'haar' } }))).toMatchObject({ kind: 'signal', samples: 64, basis: 'Haar' });
    expect(recoveryShape(declare({ kind: 'bernoulli', rows: 10, cols: 40, seed: 2, basis: { kind: 'dct2' } }))).toMatchObject({
      kind: 'signal',
      samples: 40,
      basis: 'DCT-II',
      sampleTimes: null, // projections are not time samples
    });
    expect(recoveryShape(declare({ kind: 'partial_dft', n: 64, samples }))).toMatchObject({ kind: 'signal', basis: 'identity', sampleTimes: null });
  });

  it('knows when each time sample was taken, in measurement order', () => {
    const listed = recoveryShape(declare({ kind: 'sampling', n: 16, samples: { law: 'explicit', indices: [9, 2, 14] }, basis: { kind: 'dft' } }));
    expect(listed.kind === 'spectrum' && Array.from(listed.sampleTimes!)).toEqual([9, 2, 14]);
    // Seeded sets: the derivation of docs/operators.md (partial Fisher–Yates on MT19937).
    const seeded = recoveryShape(declare({ kind: 'sampling', n: 256, samples: { law: 'uniform', m: 40, seed: 77 } }));
    expect(seeded.kind === 'signal' && Array.from(seeded.sampleTimes!)).toEqual(Array.from(drawUniformIndices(256, 40, 77)));
  });

  it('falls back to plain coefficients for a description it cannot read', () => {
    expect(recoveryShape(declare({ kind: 'hologram', n: 5 })).kind).toBe('coefficients');
    expect(recoveryShape(declare({ kind: 'gabor', n: 'many' })).kind).toBe('coefficients');
  });
});
