import { describe, expect, it } from 'vitest';
import { buildOperator } from '../build.js';
import { LIMITS, OperatorDescriptionError, parseOperatorDescription } from '../description.js';

/** Parse `raw` expecting a rejection on `field` whose message contains every fragment. */
function expectRejected(raw: unknown, field: string, ...fragments: string[]): void {
  let error: unknown;
  try {
    parseOperatorDescription(raw);
  } catch (e) {
    error = e;
  }
  expect(error).toBeInstanceOf(OperatorDescriptionError);
  const err = error as OperatorDescriptionError;
  expect(err.field).toBe(field);
  expect(err.message.startsWith(field === '' ? 'operator description:' : `${field}:`)).toBe(true);
  for (const f of fragments) expect(err.message).toContain(f);
}

const uniform = { law: 'uniform', m: 8, seed: 1 };

describe('operator description validation', () => {
  it('accepts every documented form and survives a JSON round trip', () => {
    const valid = [
      { kind: 'sampling', n: 64, samples: uniform, basis: { kind: 'dft' } },
      { kind: 'partial_dft', n: 64, samples: { law: 'variable_density', m: 8, seed: 1, decay: 2 }, basis: { kind: 'haar', levels: 3 } },
      { kind: 'partial_dft', n: 5, samples: { law: 'explicit', indices: [4, 0] } },
      { kind: 'gabor', n: 16, window: { kind: 'steinhaus', seed: 0 }, grid: { delays: 4, dopplerFrom: -2, dopplerTo: 3 } },
      { kind: 'gabor', n: 3, window: { kind: 'explicit', re: [1, 0, 0] } },
      { kind: 'gaussian', rows: 4, cols: 16, seed: 4294967295, basis: { kind: 'db4' } },
      { kind: 'bernoulli', rows: 4, cols: 6, seed: 0 },
      { kind: 'matrix', rows: 1, cols: 2, re: [1, 2], im: [0, 1] },
    ];
    for (const raw of valid) {
      const parsed = parseOperatorDescription(JSON.parse(JSON.stringify(raw)));
      expect(parsed).toEqual(raw);
      expect(() => buildOperator(parsed)).not.toThrow();
    }
  });

  it('names the field of a negative, zero or fractional size', () => {
    expectRejected({ kind: 'partial_dft', n: -4, samples: uniform }, 'n', 'at least 1', '-4');
    expectRejected({ kind: 'gaussian', rows: 0, cols: 4, seed: 1 }, 'rows', 'at least 1');
    expectRejected({ kind: 'sampling', n: 10.5, samples: uniform }, 'n', 'integer', '10.5');
    expectRejected({ kind: 'partial_dft', n: LIMITS.maxSize + 1, samples: uniform }, 'n', `at most ${LIMITS.maxSize}`);
    expectRejected({ kind: 'gabor', n: 2048, window: { kind: 'steinhaus', seed: 1 } }, 'n', 'at most 1024');
  });

  it('rejects m > n', () => {
    expectRejected({ kind: 'partial_dft', n: 16, samples: { law: 'uniform', m: 17, seed: 1 } }, 'samples.m', '17', 'n = 16');
    expectRejected({ kind: 'sampling', n: 4, samples: { law: 'explicit', indices: [0, 1, 2, 3, 0] } }, 'samples.indices', 'exceed n = 4');
  });

  it('rejects duplicate and out-of-range indices, naming the entry', () => {
    expectRejected({ kind: 'partial_dft', n: 64, samples: { law: 'explicit', indices: [3, 9, 12, 9] } }, 'samples.indices[3]', 'index 9 repeats samples.indices[1]');
    expectRejected({ kind: 'partial_dft', n: 64, samples: { law: 'explicit', indices: [1, 2, 3, 70] } }, 'samples.indices[3]', 'index 70', '0..63');
    expectRejected({ kind: 'partial_dft', n: 64, samples: { law: 'explicit', indices: [1, -2] } }, 'samples.indices[1]', 'at least 0');
    expectRejected({ kind: 'partial_dft', n: 64, samples: { law: 'explicit', indices: [] } }, 'samples.indices', 'at least 1 entries');
  });

  it('rejects a window of the wrong length or with no energy', () => {
    expectRejected({ kind: 'gabor', n: 8, window: { kind: 'explicit', re: [1, 2, 3] } }, 'window.re', 'has 3 entries', 'n = 8');
    expectRejected({ kind: 'gabor', n: 3, window: { kind: 'explicit', re: [1, 2, 3], im: [1] } }, 'window.im', 'has 1 entries');
    expectRejected({ kind: 'gabor', n: 3, window: { kind: 'explicit', re: [0, 0, 0] } }, 'window', 'all zero');
  });

  it('rejects NaN and infinite numbers, naming the entry', () => {
    expectRejected({ kind: 'matrix', rows: 1, cols: 3, re: [1, Number.NaN, 3] }, 're[1]', 'finite number', 'NaN');
    expectRejected({ kind: 'gabor', n: 2, window: { kind: 'explicit', re: [1, Infinity] } }, 'window.re[1]', 'finite number');
    expectRejected({ kind: 'partial_dft', n: Number.NaN, samples: uniform }, 'n', 'finite number');
    expectRejected({ kind: 'partial_dft', n: 8, samples: { law: 'variable_density', m: 2, seed: 1, decay: Number.NaN } }, 'samples.decay', 'finite');
  });

  it('rejects bad seeds', () => {
    expectRejected({ kind: 'gaussian', rows: 2, cols: 2, seed: -1 }, 'seed', 'at least 0');
    expectRejected({ kind: 'gaussian', rows: 2, cols: 2, seed: 2 ** 32 }, 'seed', 'at most 4294967295');
    expectRejected({ kind: 'gabor', n: 4, window: { kind: 'rademacher', seed: 0.5 } }, 'window.seed', 'integer');
  });

  it('rejects unknown kinds, missing and unknown fields', () => {
    expectRejected({ kind: 'fourier', n: 4 }, 'kind', 'must be one of', '"partial_dft"', '"fourier"');
    expectRejected({ n: 4 }, 'kind', 'must be one of');
    expectRejected({ kind: 'partial_dft', n: 4 }, 'samples', 'is required');
    expectRejected({ kind: 'partial_dft', n: 4, samples: uniform, sampels: 1 }, 'sampels', 'not a field');
    expectRejected({ kind: 'partial_dft', n: 4, samples: { law: 'poisson', m: 1, seed: 1 } }, 'samples.law', 'must be one of');
    expectRejected({ kind: 'partial_dft', n: 64, samples: uniform, basis: { kind: 'fourier' } }, 'basis.kind', 'must be one of');
    expectRejected('partial_dft', '', 'must be an object');
    expectRejected(null, '', 'must be an object');
  });

  it('checks that wavelet bases fit the size, saying what they need', () => {
    expectRejected({ kind: 'partial_dft', n: 15, samples: uniform, basis: { kind: 'haar' } }, 'basis.kind', 'even n', '15');
    expectRejected({ kind: 'partial_dft', n: 24, samples: uniform, basis: { kind: 'db4', levels: 4 } }, 'basis.levels', 'divisible by 2^4 = 16', 'at most 3');
    expectRejected({ kind: 'gaussian', rows: 4, cols: 10, seed: 1, basis: { kind: 'haar', levels: 2 } }, 'basis.levels', 'cols divisible');
    expectRejected({ kind: 'partial_dft', n: 16, samples: uniform, basis: { kind: 'dct2', levels: 2 } }, 'basis.levels', 'only to haar and db4');
  });

  it('checks Gabor grids against n', () => {
    const gabor = (grid: object) => ({ kind: 'gabor', n: 16, window: { kind: 'steinhaus', seed: 1 }, grid });
    expectRejected(gabor({ delays: 17, dopplerFrom: 0, dopplerTo: 3 }), 'grid.delays', 'exceed n = 16');
    expectRejected(gabor({ delays: 2, dopplerFrom: -16, dopplerTo: 3 }), 'grid.dopplerFrom', '-15..15');
    expectRejected(gabor({ delays: 2, dopplerFrom: 3, dopplerTo: 2 }), 'grid.dopplerTo', 'below');
    expectRejected(gabor({ delays: 2, dopplerFrom: -8, dopplerTo: 8 }), 'grid.dopplerTo', '17 bins');
  });

  it('checks dense sizes and data lengths', () => {
    expectRejected({ kind: 'bernoulli', rows: 4096, cols: 4096, seed: 1 }, 'cols', `limit of ${LIMITS.maxDenseEntries}`);
    expectRejected({ kind: 'matrix', rows: 2, cols: 2, re: [1, 2, 3] }, 're', 'has 3 entries', 'rows·cols = 4');
    expectRejected({ kind: 'matrix', rows: 2, cols: 2, re: [1, 2, 3, 4], im: [1, 2, 3, 4, 5] }, 'im', 'has 5 entries');
  });

  it('validates a raw object handed straight to buildOperator', () => {
    expect(() => buildOperator({ kind: 'partial_dft', n: 8, samples: { law: 'uniform', m: 9, seed: 1 } })).toThrow(OperatorDescriptionError);
  });
});
