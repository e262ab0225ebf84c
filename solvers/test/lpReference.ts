/**
 * Reference l1 minimiser for real problems from a general-purpose LP solver (HiGHS via the
 * `highs` npm package): min Σ(u + v) s.t. A(u − v) = y, u, v ≥ 0, whose optimum gives the
 * basis-pursuit minimiser x = u − v (the standard LP form of basis pursuit; Chen, Donoho &
 * Saunders, SIAM J. Sci. Comput. 20(1), 1998).
 */
import { createRequire } from 'node:module';
import type { Highs } from 'highs';
import type { LinearOperator } from '../../operators/index.js';

// The package's types describe its CommonJS build, so load that one (its loader is `default`).
const loadHighs = (createRequire(import.meta.url)('highs') as { default: () => Promise<Highs> }).default;
let highsPromise: Promise<Highs> | undefined;

/** The dense real matrix of A, column by column, read through apply(e_j). */
function denseColumns(A: LinearOperator): Float64Array[] {
  const e = new Float64Array(2 * A.cols);
  const out = new Float64Array(2 * A.rows);
  const cols: Float64Array[] = [];
  for (let j = 0; j < A.cols; j++) {
    e.fill(0);
    e[2 * j] = 1;
    A.apply(e, out);
    const col = new Float64Array(A.rows);
    for (let i = 0; i < A.rows; i++) {
      if (out[2 * i + 1] !== 0) throw new Error('the LP reference needs a real operator');
      col[i] = out[2 * i]!;
    }
    cols.push(col);
  }
  return cols;
}

export interface LpSolution {
  /** Interleaved complex with zero imaginary parts, like the solvers' output. */
  x: Float64Array;
  l1: number;
}

export async function l1MinimiserByLp(A: LinearOperator, y: Float64Array): Promise<LpSolution> {
  highsPromise ??= loadHighs();
  const highs = await highsPromise;
  const { rows: m, cols: n } = A;
  const cols = denseColumns(A);
  const starts = new Int32Array(2 * n + 1);
  const indices = new Int32Array(2 * n * m);
  const values = new Float64Array(2 * n * m);
  let k = 0;
  for (let c = 0; c < 2 * n; c++) {
    starts[c] = k;
    const col = cols[c % n]!;
    const sign = c < n ? 1 : -1;
    for (let i = 0; i < m; i++) {
      indices[k] = i;
      values[k] = sign * col[i]!;
      k++;
    }
  }
  starts[2 * n] = k;
  const rhs = new Float64Array(m);
  for (let i = 0; i < m; i++) rhs[i] = y[2 * i]!;
  const model = highs.createModel({
    numCols: 2 * n,
    numRows: m,
    colCost: new Float64Array(2 * n).fill(1),
    colLower: new Float64Array(2 * n),
    colUpper: new Float64Array(2 * n).fill(highs.infinity),
    rowLower: rhs,
    rowUpper: rhs,
    matrix: { format: 'csc', numRows: m, numCols: 2 * n, starts, indices, values },
  });
  try {
    model.options.set({
      output_flag: false,
      solver: 'simplex',
      primal_feasibility_tolerance: 1e-10,
      dual_feasibility_tolerance: 1e-10,
    });
    model.run();
    if (model.getModelStatus() !== highs.constants.modelStatus.optimal) {
      throw new Error(`LP reference did not reach an optimum (status ${model.getModelStatus()})`);
    }
    const u = model.getSolution().colValue;
    const x = new Float64Array(2 * n);
    let l1 = 0;
    for (let j = 0; j < n; j++) {
      x[2 * j] = u[j]! - u[n + j]!;
      l1 += Math.abs(x[2 * j]!);
    }
    return { x, l1 };
  } finally {
    model.dispose();
  }
}
