import {
  OperatorDescriptionError,
  buildOperator,
  makeBasis,
  parseOperatorDescription,
  type LinearOperator,
  type OperatorDescription,
  type UnitaryBasis,
} from '../operators/index.js';
import { SolverSettingsError, parseSolverSettings, recoverability, solve, type RecoveryMethod, type SolveBuffers, type SolverSettings } from '../solvers/index.js';
import type { WarmState } from '../solvers/types.js';
import type { SolveOutput, StreamDeclaration, StreamShape } from './types.js';

/** A declaration whose operator or solver settings are invalid; `field` is the full path. */
export class DeclarationError extends Error {
  constructor(
    readonly field: string,
    message: string,
  ) {
    super(message);
    this.name = 'DeclarationError';
  }
}

/**
 * Validates a declaration's operator description and solver settings, with error paths
 * prefixed `stream.operator.` / `stream.solver.` as a producer wrote them.
 */
export function checkDeclaration(declaration: StreamDeclaration): { operator: OperatorDescription; solver: SolverSettings } {
  let operator: OperatorDescription;
  try {
    operator = parseOperatorDescription(declaration.operator);
  } catch (err) {
    if (err instanceof OperatorDescriptionError) throw new DeclarationError(joinPath('stream.operator', err.field), `stream.operator.${err.message}`);
    throw err;
  }
  let solver: SolverSettings;
  try {
    solver = parseSolverSettings(declaration.solver);
  } catch (err) {
    if (err instanceof SolverSettingsError) throw new DeclarationError(joinPath('stream.solver', err.field), `stream.solver.${err.message}`);
    throw err;
  }
  return { operator, solver };
}

function joinPath(prefix: string, field: string): string {
  return field === '' ? prefix : field.startsWith('[') ? `${prefix}${field}` : `${prefix}.${field}`;
}


/**
 * One stream's solving state, as it lives on its worker: the built operator, the sparsity basis
 * (to synthesise the signal), the solver settings and the warm state carried from frame to frame.
 */
export class StreamSolver {
  readonly shape: StreamShape;
  private readonly operator: LinearOperator;
  private readonly basis: UnitaryBasis | undefined;
  private readonly settings: SolverSettings;
  /** Which phase transition applies: reweighted l1 recovers more than plain l1 (and greedy methods). */
  private readonly recovery: RecoveryMethod;
  private warm: WarmState | undefined;
  /** Lent to every solve: a stream's steady solving allocates no large arrays. */
  private readonly buffers: SolveBuffers;

  constructor(declaration: StreamDeclaration) {
    const { operator, solver } = checkDeclaration(declaration);
    this.operator = buildOperator(operator);
    this.settings = solver;
    this.basis = synthesisBasis(operator);
    this.recovery = solver.method === 'reweighted_l1' ? 'reweighted_l1' : 'l1';
    // The operator kind is what the recoverability table is keyed by (solvers' familyFor).
    this.shape = { rows: this.operator.rows, cols: this.operator.cols, family: operator.kind };
    const length = 2 * this.operator.cols;
    this.buffers = { x: new Float64Array(length), iterates: [new Float64Array(length), new Float64Array(length)] };
  }

  /** Solves one frame. `y` is returned in the output untouched. */
  solve(y: Float64Array, sigma: number | undefined, wantSignal: boolean): SolveOutput {
    const coldStart = this.warm === undefined;
    const started = performance.now();
    let result;
    try {
      result = solve(this.operator, y, this.settings, this.warm, sigma, this.buffers);
    } catch (err) {
      this.warm = undefined; // a failed solve leaves no state to trust
      throw err;
    }
    const solveMs = performance.now() - started;
    this.warm = result.warm;
    const support = result.support;
    const indices = new Uint32Array(support.length);
    const values = new Float64Array(2 * support.length);
    for (let j = 0; j < support.length; j++) {
      const col = support[j]!;
      indices[j] = col;
      values[2 * j] = result.x[2 * col]!;
      values[2 * j + 1] = result.x[2 * col + 1]!;
    }
    const cap = 'maxIterations' in this.settings ? this.settings.maxIterations : Number.POSITIVE_INFINITY;
    const output: SolveOutput = {
      evidence: {
        relative_residual: result.relativeResidual,
        residual: result.residualNorm,
        iterations: result.iterations,
        certificate_kind: result.certificate.kind,
        certificate: result.certificate.value,
        converged: result.converged,
        support_size: support.length,
        added: result.supportChange.added,
        removed: result.supportChange.removed,
        recoverability: recoverability(this.shape.family, this.shape.rows, this.shape.cols, support.length, this.recovery).verdict,
        solve_ms: solveMs,
      },
      coldStart,
      hitIterationCap: !result.converged && result.iterations >= cap,
      indices,
      values,
      y,
    };
    if (wantSignal) output.signal = this.synthesize(result.x);
    return output;
  }

  /** The signal behind the coefficients: Ψ c with the declared basis, or c itself without one. */
  private synthesize(x: Float64Array): Float64Array {
    const out = new Float64Array(x.length);
    if (this.basis) this.basis.synthesize(x, out);
    else out.set(x);
    return out;
  }
}

/** The basis the unknowns are coefficients in (none for Gabor and identity). */
function synthesisBasis(desc: OperatorDescription): UnitaryBasis | undefined {
  if (desc.kind === 'gabor' || !desc.basis || desc.basis.kind === 'identity') return undefined;
  const n = desc.kind === 'sampling' || desc.kind === 'partial_dft' ? desc.n : desc.cols;
  return makeBasis(desc.basis.kind, n, desc.basis.levels);
}
