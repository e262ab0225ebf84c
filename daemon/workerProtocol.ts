import type { SolveOutput, StreamDeclaration, StreamShape } from '../pipeline/types.js';

/** Messages between the pool (main thread) and a solver worker. Every request has an id. */
export type WorkerRequest =
  | { type: 'open'; id: number; stream: string; declaration: StreamDeclaration }
  | { type: 'solve'; id: number; stream: string; seq: number; y: Float64Array; sigma?: number; wantSignal: boolean }
  | { type: 'close'; id: number; stream: string };

export type WorkerReply =
  | { id: number; ok: true; shape: StreamShape }
  | { id: number; ok: true; output: SolveOutput }
  | { id: number; ok: true }
  | { id: number; ok: false; error: string; field?: string };
