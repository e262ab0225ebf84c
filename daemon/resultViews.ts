import { float64ToBin, uint32ToBin, type ResultMessage, type WireSparse } from '../protocol/index.js';
import type { PublishedResult } from '../pipeline/types.js';

/**
 * What a subscriber receives of each result. Every result carries flags and evidence; a view
 * adds the nonzero coefficients, the top-k largest, and/or the reconstructed signal. Results are
 * encoded once per distinct view and the bytes shared by every subscriber with that view.
 */
export interface ResultView {
  coefficients: boolean;
  /** 0 = no top-k payload. */
  topK: number;
  signal: boolean;
  /** The frame's own measurements (and noise level), for recorders. */
  measurements: boolean;
}

export function viewKey(v: ResultView): string {
  return `${v.coefficients ? 'c' : ''}${v.topK > 0 ? `k${v.topK}` : ''}${v.signal ? 's' : ''}${v.measurements ? 'm' : ''}`;
}

/** The `k` coefficients of largest magnitude, largest first (ties: lower index first). */
export function largestCoefficients(indices: Uint32Array, values: Float64Array, k: number): { indices: Uint32Array; values: Float64Array } {
  const order = Array.from(indices.keys());
  const mag = (i: number) => values[2 * i]! ** 2 + values[2 * i + 1]! ** 2;
  order.sort((a, b) => mag(b) - mag(a) || indices[a]! - indices[b]!);
  const take = order.slice(0, Math.min(k, order.length));
  const outIdx = new Uint32Array(take.length);
  const outVal = new Float64Array(2 * take.length);
  take.forEach((src, j) => {
    outIdx[j] = indices[src]!;
    outVal[2 * j] = values[2 * src]!;
    outVal[2 * j + 1] = values[2 * src + 1]!;
  });
  return { indices: outIdx, values: outVal };
}

function wireSparse(indices: Uint32Array, values: Float64Array): WireSparse {
  return { indices: uint32ToBin(indices), values: float64ToBin(values) };
}

/**
 * The result message for one view. An empty support has no coefficients to carry (the protocol's
 * binary fields are never empty), so `coefficients` and `top_k` are then absent.
 */
export function resultMessage(r: PublishedResult, view: ResultView): ResultMessage {
  const msg: ResultMessage = {
    v: 1,
    type: 'result',
    stream: r.stream,
    seq: r.seq,
    time: r.time,
    solved_at: r.solvedAt,
    flags: r.flags,
    evidence: r.evidence,
  };
  const hasSupport = r.indices.length > 0;
  if (view.coefficients && hasSupport) msg.coefficients = wireSparse(r.indices, r.values);
  if (view.topK > 0 && hasSupport) {
    const top = largestCoefficients(r.indices, r.values, view.topK);
    msg.top_k = wireSparse(top.indices, top.values);
  }
  if (view.signal && r.signal) msg.signal = float64ToBin(r.signal);
  if (view.measurements) {
    msg.y = float64ToBin(r.y);
    if (r.sigma !== undefined) msg.sigma = r.sigma;
  }
  return msg;
}
