import fc from 'fast-check';

/**
 * Generators of operator descriptions and stream declarations near the valid space (small sizes,
 * so that accepted ones can be built quickly): every kind of docs/operators.md with its options,
 * some combinations invalid on purpose (odd sizes for wavelets, m > n, repeated indices, wrong
 * lengths). The fuzz suites then edit them with hostile values.
 */

const seed = fc.integer({ min: 0, max: 2 ** 32 - 1 });

const basis = fc.option(
  fc.record(
    { kind: fc.constantFrom('identity', 'dft', 'dct2', 'haar', 'db4'), levels: fc.integer({ min: 1, max: 8 }) },
    { requiredKeys: ['kind'] },
  ),
  { nil: undefined },
);

function samples(n: number): fc.Arbitrary<object> {
  return fc.oneof(
    fc.record({ law: fc.constant('uniform'), m: fc.integer({ min: 1, max: n + 2 }), seed }),
    fc.record({ law: fc.constant('variable_density'), m: fc.integer({ min: 1, max: n + 2 }), seed, decay: fc.double({ min: 0, max: 20, noNaN: true }) }, { requiredKeys: ['law', 'm', 'seed'] }),
    fc.record({ law: fc.constant('explicit'), indices: fc.array(fc.integer({ min: 0, max: n }), { minLength: 1, maxLength: Math.min(n + 1, 40) }) }),
  );
}

const sampled = fc.integer({ min: 1, max: 256 }).chain((n) =>
  fc.record(
    { kind: fc.constantFrom('sampling', 'partial_dft'), n: fc.constant(n), samples: samples(n), basis },
    { requiredKeys: ['kind', 'n', 'samples'] },
  ),
);

const gabor = fc.integer({ min: 1, max: 32 }).chain((n) =>
  fc.record(
    {
      kind: fc.constant('gabor'),
      n: fc.constant(n),
      window: fc.oneof(
        fc.record({ kind: fc.constantFrom('steinhaus', 'rademacher', 'gaussian'), seed }),
        fc.record(
          {
            kind: fc.constant('explicit'),
            re: fc.array(fc.double({ min: -2, max: 2, noNaN: true }), { minLength: n, maxLength: n + 1 }),
            im: fc.array(fc.double({ min: -2, max: 2, noNaN: true }), { minLength: n, maxLength: n }),
          },
          { requiredKeys: ['kind', 're'] },
        ),
      ),
      grid: fc.record({ delays: fc.integer({ min: 1, max: n + 1 }), dopplerFrom: fc.integer({ min: -n, max: n }), dopplerTo: fc.integer({ min: -n, max: n }) }),
    },
    { requiredKeys: ['kind', 'n', 'window'] },
  ),
);

const dense = fc.record(
  { kind: fc.constantFrom('gaussian', 'bernoulli'), rows: fc.integer({ min: 1, max: 32 }), cols: fc.integer({ min: 1, max: 64 }), seed, basis },
  { requiredKeys: ['kind', 'rows', 'cols', 'seed'] },
);

const explicitMatrix = fc
  .record({ rows: fc.integer({ min: 1, max: 6 }), cols: fc.integer({ min: 1, max: 8 }) })
  .chain(({ rows, cols }) =>
    fc.record(
      {
        kind: fc.constant('matrix'),
        rows: fc.constant(rows),
        cols: fc.constant(cols),
        re: fc.array(fc.double({ min: -3, max: 3, noNaN: true }), { minLength: rows * cols, maxLength: rows * cols + 1 }),
        im: fc.array(fc.double({ min: -3, max: 3, noNaN: true }), { minLength: rows * cols, maxLength: rows * cols }),
        basis,
      },
      { requiredKeys: ['kind', 'rows', 'cols', 're'] },
    ),
  );

/** An operator description of any kind, valid or nearly so. */
export const operatorDescription: fc.Arbitrary<Record<string, unknown>> = fc.oneof(sampled, gabor, dense, explicitMatrix) as fc.Arbitrary<Record<string, unknown>>;

/** Solver settings of every method, valid or nearly so (docs/solvers.md). */
export const solverSettings: fc.Arbitrary<Record<string, unknown>> = fc.oneof(
  fc.record({ method: fc.constant('lasso'), maxIterations: fc.integer({ min: 1, max: 200 }), tolerance: fc.double({ min: 1e-9, max: 0.5, noNaN: true }), lambda: fc.double({ min: 0, max: 1, noNaN: true }) }, { requiredKeys: ['method'] }),
  fc.record({ method: fc.constantFrom('basis_pursuit', 'reweighted_l1'), maxIterations: fc.integer({ min: 1, max: 200 }), epsilon: fc.double({ min: 0, max: 1, noNaN: true }) }, { requiredKeys: ['method'] }),
  fc.record({ method: fc.constantFrom('omp', 'cosamp', 'iht'), sparsity: fc.integer({ min: 1, max: 16 }), tolerance: fc.double({ min: 1e-9, max: 0.5, noNaN: true }) }, { requiredKeys: ['method', 'sparsity'] }),
) as fc.Arbitrary<Record<string, unknown>>;

/** A full stream declaration as a producer writes it (the `stream` field of `declare`). */
export const streamDeclaration: fc.Arbitrary<Record<string, unknown>> = fc.record(
  {
    name: fc.stringMatching(/^[a-z0-9][a-z0-9._-]{0,20}$/),
    operator: operatorDescription,
    solver: solverSettings,
    alerts: fc.array(
      fc.record({
        metric: fc.constantFrom('relative_residual', 'certificate', 'iterations', 'support_churn', 'input_gap'),
        above: fc.double({ min: 0.1, max: 10, noNaN: true }),
        clear_below: fc.double({ min: 0, max: 0.09, noNaN: true }),
        k: fc.integer({ min: 1, max: 5 }),
        of: fc.integer({ min: 5, max: 20 }),
      }),
      { maxLength: 3 },
    ),
    queue: fc.record({ capacity: fc.integer({ min: 1, max: 64 }), policy: fc.constantFrom('refuse_new', 'drop_oldest', 'keep_latest') }),
    noise_sigma: fc.double({ min: 0, max: 1, noNaN: true }),
    note: fc.string({ maxLength: 40 }),
  },
  { requiredKeys: ['name', 'operator', 'solver'] },
) as fc.Arbitrary<Record<string, unknown>>;
