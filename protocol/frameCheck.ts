import { MAX_MEASUREMENTS, MAX_SEQ, PROTOCOL_VERSION } from './limits.js';
import { streamNameProblem } from './names.js';

/**
 * Frames are nearly every message a daemon decodes, so a frame that is exactly right is accepted
 * by this direct check instead of the schema walk. It accepts only what `frameSchema` accepts
 * (the property test in codec.test.ts holds it to that); anything it does not accept goes to the
 * schema, which names the problem.
 */
export function isWellFormedFrame(raw: Record<string, unknown>): boolean {
  const { stream, seq, time, y, sigma } = raw;
  let keys = 0;
  for (const key in raw) if (Object.hasOwn(raw, key)) keys++;
  return (
    // v, type, stream, seq, time, y (each checked below) and sigma when present: nothing else.
    keys === (sigma === undefined ? 6 : 7) &&
    raw.v === PROTOCOL_VERSION &&
    raw.type === 'frame' &&
    typeof stream === 'string' &&
    streamNameProblem(stream) === null &&
    Number.isSafeInteger(seq) &&
    (seq as number) >= 0 &&
    (seq as number) <= MAX_SEQ &&
    isNonNegativeFinite(time) &&
    y instanceof Uint8Array &&
    y.byteLength > 0 &&
    y.byteLength % 16 === 0 &&
    y.byteLength / 16 <= MAX_MEASUREMENTS &&
    (sigma === undefined || isNonNegativeFinite(sigma))
  );
}

function isNonNegativeFinite(v: unknown): boolean {
  return typeof v === 'number' && Number.isFinite(v) && v >= 0;
}
