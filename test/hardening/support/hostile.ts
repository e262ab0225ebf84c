import fc from 'fast-check';

/**
 * Generators of hostile input shared by the fuzz suites: values of the wrong type or out of
 * range, byte-level mutations of valid messages, and structure-aware edits (replace, delete or
 * add one field anywhere in a message). Invented data only; the oracles live in the tests.
 */

/** A path into a decoded message: map keys and array indices. */
export type Path = Array<string | number>;

/** Builds a value nested `depth` levels deep (arrays or maps alternately). */
export function nested(depth: number, leaf: unknown = 1): unknown {
  let v: unknown = leaf;
  for (let i = 0; i < depth; i++) v = i % 2 === 0 ? [v] : { k: v };
  return v;
}

/** Numbers that break naive checks: non-finite, negative zero, beyond 2^53, denormals, extremes. */
export const hostileNumber: fc.Arbitrary<number> = fc.oneof(
  fc.constantFrom(Number.NaN, Infinity, -Infinity, -0, -1, 0.5, -0.5, 2 ** 31, 2 ** 32, 2 ** 53, 2 ** 53 + 2, -(2 ** 53) - 2, Number.MAX_VALUE, -Number.MAX_VALUE, Number.MIN_VALUE, 1e308),
  fc.integer({ min: -(2 ** 31), max: 2 ** 31 }),
  fc.double(),
);

/** Any value of the wrong kind for some field: numbers above, strings, booleans, null, bytes, containers, deep nesting. */
export const hostileValue: fc.Arbitrary<unknown> = fc.oneof(
  { weight: 4, arbitrary: hostileNumber },
  { weight: 1, arbitrary: fc.bigInt({ min: -(2n ** 63n), max: 2n ** 64n - 1n }) },
  { weight: 2, arbitrary: fc.string({ maxLength: 80 }) },
  { weight: 1, arbitrary: fc.constantFrom('', ' ', '*', '../x', 'a'.repeat(65), 'x'.repeat(70_000), '\u0000', '__proto__', 'constructor') },
  { weight: 1, arbitrary: fc.boolean() },
  { weight: 1, arbitrary: fc.constant(null) },
  { weight: 2, arbitrary: fc.uint8Array({ maxLength: 64 }) },
  { weight: 1, arbitrary: fc.array(fc.oneof(fc.integer(), fc.string({ maxLength: 8 }), fc.constant(null)), { maxLength: 8 }) },
  { weight: 1, arbitrary: fc.dictionary(fc.string({ maxLength: 8 }), fc.integer(), { maxKeys: 6 }) },
  { weight: 1, arbitrary: fc.integer({ min: 30, max: 400 }).map((d) => nested(d)) },
);

/** Every path in a decoded value (maps and arrays), excluding the root; bytes are leaves. */
export function pathsOf(value: unknown, prefix: Path = []): Path[] {
  if (value instanceof Uint8Array || value === null || typeof value !== 'object') return [];
  const entries: Array<[string | number, unknown]> = Array.isArray(value) ? value.map((v, i) => [i, v]) : Object.entries(value);
  return entries.flatMap(([k, v]) => [[...prefix, k], ...pathsOf(v, [...prefix, k])]);
}

/** A deep copy that keeps bytes as fresh Uint8Arrays. */
export function clone<T>(value: T): T {
  if (value instanceof Uint8Array) return Uint8Array.from(value) as T;
  if (Array.isArray(value)) return value.map(clone) as T;
  if (value !== null && typeof value === 'object') return Object.fromEntries(Object.entries(value).map(([k, v]) => [k, clone(v)])) as T;
  return value;
}

export type Edit = { kind: 'replace'; path: Path; value: unknown } | { kind: 'delete'; path: Path } | { kind: 'add'; path: Path; key: string; value: unknown };

/** One structure-aware edit of `message` (a copy is edited; the original stays intact). */
export function editOf(message: object): fc.Arbitrary<Edit> {
  const paths = pathsOf(message);
  const containers: Path[] = [[], ...paths.filter((p) => isMap(valueAt(message, p)))];
  return fc.oneof(
    { weight: 6, arbitrary: fc.record({ kind: fc.constant('replace' as const), path: fc.constantFrom(...paths), value: hostileValue }) },
    { weight: 2, arbitrary: fc.record({ kind: fc.constant('delete' as const), path: fc.constantFrom(...paths) }) },
    {
      weight: 1,
      arbitrary: fc.record({
        kind: fc.constant('add' as const),
        path: fc.constantFrom(...containers),
        key: fc.oneof(fc.string({ minLength: 1, maxLength: 12 }), fc.constantFrom('__proto__', 'constructor', 'v', 'type')),
        value: hostileValue,
      }),
    },
  );
}

export function applyEdit<T extends object>(message: T, edit: Edit): T {
  const copy = clone(message);
  if (edit.kind === 'add') {
    const target = valueAt(copy, edit.path) as Record<string, unknown>;
    // defineProperty: a key named __proto__ becomes an own field, as a decoder would produce it.
    Object.defineProperty(target, edit.key, { value: edit.value, enumerable: true, writable: true, configurable: true });
    return copy;
  }
  const parent = valueAt(copy, edit.path.slice(0, -1)) as Record<string | number, unknown>;
  const key = edit.path[edit.path.length - 1]!;
  if (edit.kind === 'delete') {
    if (Array.isArray(parent)) parent.splice(key as number, 1);
    else delete parent[key];
  } else {
    parent[key] = edit.value;
  }
  return copy;
}

export function valueAt(root: unknown, path: Path): unknown {
  let v = root;
  for (const k of path) v = (v as Record<string | number, unknown>)[k];
  return v;
}

function isMap(v: unknown): boolean {
  return v !== null && typeof v === 'object' && !Array.isArray(v) && !(v instanceof Uint8Array);
}

/** Formats a path the way error `field`s are written: `a.b[0].c`. */
export function dotted(path: Path): string {
  let out = '';
  for (const k of path) out += typeof k === 'number' ? `[${k}]` : out === '' ? k : `.${k}`;
  return out;
}

/** True when one dotted path is the other or lies inside it (`a.b` and `a.b[2].c`). */
export function related(a: string, b: string): boolean {
  const inside = (outer: string, inner: string) => inner === outer || outer === '' || inner.startsWith(`${outer}.`) || inner.startsWith(`${outer}[`);
  return inside(a, b) || inside(b, a);
}

type ByteMutation =
  | { kind: 'flip'; at: number; bit: number }
  | { kind: 'truncate'; keep: number }
  | { kind: 'overwrite'; at: number; bytes: Uint8Array }
  | { kind: 'insert'; at: number; bytes: Uint8Array }
  | { kind: 'remove'; at: number; count: number };

/** Header bytes that make a MessagePack decoder think a huge container, string or bin follows. */
const HUGE_HEADERS = [
  [0xdd, 0xff, 0xff, 0xff, 0xff], // array32 of 2^32 − 1 entries
  [0xdf, 0xff, 0xff, 0xff, 0xff], // map32
  [0xc6, 0xff, 0xff, 0xff, 0xff], // bin32
  [0xdb, 0xff, 0xff, 0xff, 0xff], // str32
  [0xc9, 0x7f, 0xff, 0xff, 0xff, 0x01], // ext32
  [0xdc, 0xff, 0xff], // array16
  [0xcf, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff], // uint64 max
  [0xd3, 0x80, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00], // int64 min
  [0xcb, 0x7f, 0xf8, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00], // float64 NaN
  [0xcb, 0x7f, 0xf0, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00], // float64 +Infinity
  [0xc1], // never used
].map((b) => Uint8Array.from(b));

const insertion = fc.oneof(fc.uint8Array({ minLength: 1, maxLength: 16 }), fc.constantFrom(...HUGE_HEADERS));

function byteMutation(length: number): fc.Arbitrary<ByteMutation> {
  const at = fc.integer({ min: 0, max: Math.max(0, length - 1) });
  return fc.oneof(
    fc.record({ kind: fc.constant('flip' as const), at, bit: fc.integer({ min: 0, max: 7 }) }),
    fc.record({ kind: fc.constant('truncate' as const), keep: fc.integer({ min: 0, max: Math.max(0, length - 1) }) }),
    fc.record({ kind: fc.constant('overwrite' as const), at, bytes: insertion }),
    fc.record({ kind: fc.constant('insert' as const), at, bytes: insertion }),
    fc.record({ kind: fc.constant('remove' as const), at, count: fc.integer({ min: 1, max: 16 }) }),
  );
}

function mutate(bytes: Uint8Array, m: ByteMutation): Uint8Array {
  switch (m.kind) {
    case 'flip': {
      const out = Uint8Array.from(bytes);
      if (out.length > 0) out[m.at % out.length]! ^= 1 << m.bit;
      return out;
    }
    case 'truncate':
      return bytes.slice(0, m.keep);
    case 'overwrite': {
      const out = Uint8Array.from(bytes);
      out.set(m.bytes.subarray(0, Math.max(0, out.length - m.at)), Math.min(m.at, out.length));
      return out;
    }
    case 'insert':
      return Uint8Array.from([...bytes.subarray(0, m.at), ...m.bytes, ...bytes.subarray(m.at)]);
    case 'remove':
      return Uint8Array.from([...bytes.subarray(0, m.at), ...bytes.subarray(m.at + m.count)]);
  }
}

/** One to four byte-level mutations of `bytes` (bit flips, truncation, huge headers, splices). */
export function mutatedBytes(bytes: Uint8Array): fc.Arbitrary<Uint8Array> {
  return fc.array(byteMutation(bytes.length), { minLength: 1, maxLength: 4 }).map((ms) => ms.reduce(mutate, bytes));
}
