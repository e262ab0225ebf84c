/**
 * Every way the codec can reject a message. The daemon sends the same code back in an
 * `error` message, so producers and subscribers see the reason verbatim.
 */
export type ProtocolErrorCode =
  /** Not MessagePack, or trailing bytes after the one top-level value. */
  | 'malformed'
  /** Larger than MAX_MESSAGE_BYTES. */
  | 'too_large'
  /** The top-level value is not a map. */
  | 'not_a_map'
  /** `v` is missing or not a version this build speaks. */
  | 'unsupported_version'
  /** `type` is missing or not a known message type. */
  | 'unknown_type'
  /** A field is missing, has the wrong type, or breaks a rule; `field` names it. */
  | 'invalid_field';

export class ProtocolError extends Error {
  override readonly name = 'ProtocolError';
  constructor(
    readonly code: ProtocolErrorCode,
    message: string,
    /** Dotted path of the offending field, e.g. `stream.alerts[0].clear_below`. */
    readonly field?: string,
    /** The message's `ref` when it could be read, so an error reply can name the request. */
    readonly ref?: string,
  ) {
    super(field ? `${field}: ${message}` : message);
  }
}

/** Formats a path of keys and indices as `a.b[0].c`. */
export function fieldPath(path: ReadonlyArray<PropertyKey>): string {
  let out = '';
  for (const key of path) {
    if (typeof key === 'number') out += `[${key}]`;
    else out += out === '' ? String(key) : `.${String(key)}`;
  }
  return out;
}
