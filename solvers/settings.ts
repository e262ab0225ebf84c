import { z } from 'zod';

/**
 * Solver settings as a stream declares them: a discriminated union on `method`, validated with
 * zod. Unknown fields are refused (a misspelt option must not be ignored silently). Every option
 * and default is documented in docs/solvers.md; the defaults here are the source of truth.
 */

const positiveInt = z.number().int().min(1);
/**
 * An iteration budget. Capped so one declaration cannot hold its worker (and every stream
 * sharing it) for minutes on a single frame; see "Limits" in docs/solvers.md.
 */
export const MAX_ITERATION_BUDGET = 100_000;
const iterationBudget = positiveInt.max(MAX_ITERATION_BUDGET);
const fraction = z.number().gt(0).lt(1);
const nonNegative = z.number().min(0);

/** Options every method understands. */
const common = {
  /** Fit least squares on the detected support at the end (undoes l1 shrinkage). */
  refit: z.boolean().default(true),
  /** An entry counts as nonzero when |x_j| > supportThreshold · max|x|. */
  supportThreshold: z.number().min(0).lt(1).default(1e-3),
  /** The stream's noise level σ (see noise.ts) when frames do not send their own. */
  noiseSigma: nonNegative.optional(),
};

const lasso = z.strictObject({
  method: z.literal('lasso'),
  ...common,
  /** Total FISTA iterations over all continuation stages and noise-estimation rounds. */
  maxIterations: iterationBudget.default(1000),
  /** Relative duality gap (P − D)/P to stop at. */
  tolerance: fraction.default(1e-5),
  /** Also stop when ‖x_k − x_{k−1}‖ ≤ stepTolerance · ‖x_k‖ (converged only if the gap is met). */
  stepTolerance: z.number().min(0).lt(1).default(1e-12),
  /** Fixed λ; when absent λ comes from the noise level, or from an estimate of it. */
  lambda: nonNegative.optional(),
  /** Multiplier in λ = factor · σ · c̄ · √(2 ln n). */
  lambdaFactor: z.number().gt(0).default(1),
  /** λ never goes below lambdaFloor · ‖Aᴴy‖∞ (noiseless frames would otherwise never finish). */
  lambdaFloor: fraction.default(1e-3),
  /** Solve a decreasing sequence of λ from ‖Aᴴy‖∞ down to the target (cold starts). */
  continuation: z.boolean().default(true),
  /** Ratio between successive continuation levels. */
  continuationFactor: fraction.default(0.2),
  /** Gradient-based adaptive restart of the momentum. */
  restart: z.boolean().default(true),
});

const noiseAwareL1 = {
  ...common,
  /** Fixed ε in ‖A x − y‖ ≤ ε; when absent ε comes from the noise level (0 without one). */
  epsilon: nonNegative.optional(),
  /** Multiplier in ε = factor · σ · √(m + 2√(2m)). */
  epsilonFactor: z.number().gt(0).default(1),
};

const basisPursuit = z.strictObject({
  method: z.literal('basis_pursuit'),
  ...noiseAwareL1,
  maxIterations: iterationBudget.default(5000),
  /** Relative duality gap and relative infeasibility to stop at. */
  tolerance: fraction.default(1e-6),
});

const reweightedL1 = z.strictObject({
  method: z.literal('reweighted_l1'),
  ...noiseAwareL1,
  /** Iterations of each weighted basis-pursuit solve. */
  maxIterations: iterationBudget.default(3000),
  /**
   * Gap and infeasibility each weighted solve stops at. Looser than basis pursuit's: the weights
   * only need the support, and the refit (or the exact finish) settles the values.
   */
  tolerance: fraction.default(1e-4),
  /** Weighted solves after the first, unweighted one. */
  reweightings: z.number().int().min(0).max(50).default(6),
});

const greedy = {
  ...common,
  /** Known or bounded number of nonzeros. */
  sparsity: positiveInt,
  /** Stop when ‖A x − y‖ ≤ tolerance · ‖y‖ (or within the noise level when one is known). */
  tolerance: fraction.default(1e-6),
};

const omp = z.strictObject({ method: z.literal('omp'), ...greedy });
const cosamp = z.strictObject({ method: z.literal('cosamp'), ...greedy, maxIterations: iterationBudget.default(50) });
const iht = z.strictObject({ method: z.literal('iht'), ...greedy, maxIterations: iterationBudget.default(500) });

export const solverSettingsSchema = z.discriminatedUnion('method', [lasso, basisPursuit, omp, cosamp, iht, reweightedL1]);

export type SolverSettings = z.output<typeof solverSettingsSchema>;
export type SolverMethod = SolverSettings['method'];
export type LassoSettings = z.output<typeof lasso>;
export type BasisPursuitSettings = z.output<typeof basisPursuit>;
export type ReweightedL1Settings = z.output<typeof reweightedL1>;
export type OmpSettings = z.output<typeof omp>;
export type CosampSettings = z.output<typeof cosamp>;
export type IhtSettings = z.output<typeof iht>;

/** Settings that fail validation. `field` is the dotted path of the first offending field. */
export class SolverSettingsError extends Error {
  override readonly name = 'SolverSettingsError';
  constructor(
    readonly field: string,
    message: string,
  ) {
    super(`${field}: ${message}`);
  }
}

/** Validates raw settings (e.g. decoded from a stream declaration) and fills in defaults. */
export function parseSolverSettings(raw: unknown): SolverSettings {
  const parsed = solverSettingsSchema.safeParse(raw);
  if (parsed.success) return parsed.data;
  const issue = parsed.error.issues[0]!;
  const keys = issue.code === 'unrecognized_keys' ? issue.keys : [];
  const path = [...issue.path, ...keys.slice(0, 1)];
  const field = path.length === 0 ? 'settings' : path.map(String).join('.');
  const message =
    issue.code === 'unrecognized_keys'
      ? `unknown option (methods: ${METHODS.join(', ')}; see docs/solvers.md)`
      : issue.path[0] === 'method' && issue.path.length === 1
        ? `must be one of ${METHODS.join(', ')}`
        : issue.message;
  throw new SolverSettingsError(field, message);
}

const METHODS: readonly SolverMethod[] = ['lasso', 'basis_pursuit', 'omp', 'cosamp', 'iht', 'reweighted_l1'];
