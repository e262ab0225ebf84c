/**
 * sparsewire solvers: sparse recovery over the matrix-free operator interface.
 * Pure computation (typed arrays in, typed arrays out); see docs/solvers.md.
 */
export type { Certificate, LinearOperator, SolveResult, SupportGram, WarmState } from './types.js';
export {
  parseSolverSettings,
  solverSettingsSchema,
  SolverSettingsError,
  type SolverSettings,
  type SolverMethod,
  type LassoSettings,
  type BasisPursuitSettings,
  type ReweightedL1Settings,
  type OmpSettings,
  type CosampSettings,
  type IhtSettings,
} from './settings.js';
export { solve, SolverInputError, type SolveBuffers } from './solve.js';
export { lambdaFromNoise, epsilonFromNoise, sigmaFromResidual } from './noise.js';
export { recoverability, familyFor, type Recoverability, type RecoveryMethod, type Verdict } from './recoverability.js';
