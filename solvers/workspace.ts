import type { LinearOperator } from '../operators/types.js';

/**
 * Scratch buffers cached per operator, so that solving the thousandth frame on an operator
 * allocates nothing but its result arrays. Buffers are keyed by a name that each module
 * prefixes with its own tag ('fista.x', 'cg.p', ...), so nested solvers never share one.
 * Solving is synchronous, so one workspace per operator is never used by two solves at once.
 */
export class Workspace {
  readonly n: number;
  readonly m: number;
  private readonly floatBuffers = new Map<string, Float64Array>();
  private readonly ints = new Map<string, Int32Array>();
  /** Root-mean-square column norm of the operator, estimated once (see noise.ts). */
  rmsColumnNorm: number | undefined;

  constructor(op: LinearOperator) {
    this.n = op.cols;
    this.m = op.rows;
  }

  /** A complex vector over the columns (length 2n). Contents are whatever the last user left. */
  colVector(name: string): Float64Array {
    return this.floats1(name, 2 * this.n);
  }

  /** A complex vector over the rows (length 2m). */
  rowVector(name: string): Float64Array {
    return this.floats1(name, 2 * this.m);
  }

  /** A real vector with one entry per column (weights, magnitudes). */
  colReals(name: string): Float64Array {
    return this.floats1(name, this.n);
  }

  /** An index buffer with room for every column. */
  colIndices(name: string): Int32Array {
    let b = this.ints.get(name);
    if (b === undefined) {
      b = new Int32Array(this.n);
      this.ints.set(name, b);
    }
    return b;
  }

  /** A real buffer of at least `length` entries; grows (once per new high) when asked for more. */
  floats(name: string, length: number): Float64Array {
    let b = this.floatBuffers.get(name);
    if (b === undefined || b.length < length) {
      b = new Float64Array(length);
      this.floatBuffers.set(name, b);
    }
    return b;
  }

  private floats1(name: string, length: number): Float64Array {
    let b = this.floatBuffers.get(name);
    if (b === undefined) {
      b = new Float64Array(length);
      this.floatBuffers.set(name, b);
    }
    return b;
  }
}

const workspaces = new WeakMap<LinearOperator, Workspace>();

/** The operator's cached workspace, created on first use and dropped with the operator. */
export function workspaceFor(op: LinearOperator): Workspace {
  let ws = workspaces.get(op);
  if (ws === undefined) {
    ws = new Workspace(op);
    workspaces.set(op, ws);
  }
  return ws;
}
