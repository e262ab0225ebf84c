import { pack, unpack } from 'msgpackr';
import { binToFloat64, binToUint32, float64ToBin, isPlainMap, uint32ToBin } from '../protocol/index.js';
import type { AlertEvent, Evidence, MissedRange, PublishedResult } from '../pipeline/types.js';

/**
 * What a partition's owner publishes on a stream's out subject for every node's gateway to fan
 * out: results, alerts, drop notices, and refusals of stored frames. MessagePack maps
 * (module-level pack/unpack); numeric arrays as little-endian `bin`, like the wire protocol.
 * This is a format between sparsewire nodes, not for subscribers (they keep the WebSocket
 * protocol).
 */
export type OutEvent =
  | { kind: 'result'; result: PublishedResult }
  | { kind: 'alert'; alert: AlertEvent }
  | { kind: 'missed'; missed: MissedRange }
  /** A frame the log had stored but the owner could not take (e.g. out of order, unknown stream). */
  | { kind: 'refused'; stream: string; seq: number; reason: string; detail: string };

export function encodeOutEvent(e: OutEvent): Uint8Array {
  switch (e.kind) {
    case 'result': {
      const r = e.result;
      return pack({
        kind: 'result',
        stream: r.stream,
        seq: r.seq,
        time: r.time,
        solved_at: r.solvedAt,
        flags: r.flags,
        evidence: r.evidence,
        indices: uint32ToBin(r.indices),
        values: float64ToBin(r.values),
        ...(r.signal ? { signal: float64ToBin(r.signal) } : {}),
        y: float64ToBin(r.y),
        ...(r.sigma !== undefined ? { sigma: r.sigma } : {}),
        latency_s: r.latencySeconds,
      });
    }
    case 'alert':
      return pack({ kind: 'alert', ...e.alert });
    case 'missed':
      return pack({ kind: 'missed', ...e.missed });
    case 'refused':
      return pack(e);
  }
}

/** Decodes an out event; throws an Error naming the field when a node sent something else. */
export function decodeOutEvent(bytes: Uint8Array): OutEvent {
  const m: unknown = unpack(bytes);
  if (!isPlainMap(m)) throw new Error('out event: not a map');
  const str = (k: string) => {
    if (typeof m[k] !== 'string') throw new Error(`out event: ${k} must be a string`);
    return m[k] as string;
  };
  const num = (k: string) => {
    if (typeof m[k] !== 'number') throw new Error(`out event: ${k} must be a number`);
    return m[k] as number;
  };
  const bin = (k: string) => {
    if (!(m[k] instanceof Uint8Array)) throw new Error(`out event: ${k} must be bytes`);
    return m[k] as Uint8Array;
  };
  switch (m.kind) {
    case 'result':
      return {
        kind: 'result',
        result: {
          stream: str('stream'),
          seq: num('seq'),
          time: num('time'),
          solvedAt: num('solved_at'),
          flags: m.flags as string[],
          evidence: m.evidence as Evidence,
          indices: binToUint32(bin('indices'), 'indices'),
          values: binToFloat64(bin('values'), 'values'),
          ...(m.signal !== undefined ? { signal: binToFloat64(bin('signal'), 'signal') } : {}),
          y: binToFloat64(bin('y'), 'y'),
          ...(m.sigma !== undefined ? { sigma: num('sigma') } : {}),
          latencySeconds: num('latency_s'),
        },
      };
    case 'alert':
      num('seq');
      str('stream');
      return { kind: 'alert', alert: m as unknown as AlertEvent };
    case 'missed':
      num('fromSeq');
      num('toSeq');
      str('stream');
      return { kind: 'missed', missed: m as unknown as MissedRange };
    case 'refused':
      return { kind: 'refused', stream: str('stream'), seq: num('seq'), reason: str('reason'), detail: str('detail') };
    default:
      throw new Error(`out event: unknown kind ${JSON.stringify(m.kind)}`);
  }
}
