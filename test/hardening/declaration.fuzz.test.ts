import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { buildOperator, LIMITS, OperatorDescriptionError, parseOperatorDescription, type OperatorDescription } from '../../operators/index.js';
import { DeclarationError, checkDeclaration } from '../../pipeline/streamSolver.js';
import type { StreamDeclaration } from '../../pipeline/types.js';
import { DEFAULT_QUEUE, streamDeclarationSchema } from '../../protocol/index.js';
import { operatorDescription, solverSettings, streamDeclaration } from './support/descriptions.js';
import { applyEdit, dotted, editOf, related, type Edit } from './support/hostile.js';
import { fuzzRuns, recordFigures } from './support/scale.js';

// The stream-declaration validator (protocol envelope + operator description + solver settings)
// and the operator-description validator alone, under near-valid and hostile declarations.
// Oracles: docs/operators.md ("Limits", "Errors") and docs/protocol.md ("declare"): a refusal is
// the validator's own error type with a `field` path and a message that starts with it; an
// accepted description stays inside the documented size limits and can be built.

/** Unknowns and dense entries an accepted description implies (what building it allocates). */
function impliedSize(d: OperatorDescription): { unknowns: number; denseEntries: number } {
  switch (d.kind) {
    case 'sampling':
    case 'partial_dft':
      return { unknowns: d.n, denseEntries: 0 };
    case 'gabor': {
      const bins = d.grid ? d.grid.dopplerTo - d.grid.dopplerFrom + 1 : d.n;
      return { unknowns: (d.grid?.delays ?? d.n) * bins, denseEntries: 0 };
    }
    default:
      return { unknowns: d.cols, denseEntries: d.rows * d.cols };
  }
}

/** Documented ceilings (docs/operators.md, "Limits"): n ≤ 65 536, Gabor n ≤ 1024 (n² unknowns), rows·cols ≤ 2^22. */
const MAX_UNKNOWNS_IMPLIED = Math.max(LIMITS.maxSize, LIMITS.maxGaborSize ** 2);

/** Builds only what is cheap to build in a test; larger accepted descriptions are checked by size. */
const BUILD_BUDGET = 1 << 14;

type Verdict = 'accepted' | 'built' | 'refused';

/** Parses with the operator validator and checks the oracle; returns what happened. */
function judgeOperator(raw: unknown, editedField?: { edited: string; holder: string }): Verdict {
  let desc: OperatorDescription;
  try {
    desc = parseOperatorDescription(raw);
  } catch (err) {
    if (!(err instanceof OperatorDescriptionError)) throw new Error(`operator validator threw ${String(err)}`, { cause: err });
    expect(typeof err.field).toBe('string');
    expect(err.message.startsWith(err.field === '' ? 'operator description' : err.field)).toBe(true);
    if (editedField) expect(related(err.field, editedField.edited) || related(err.field, editedField.holder) || err.field === '').toBe(true);
    return 'refused';
  }
  const size = impliedSize(desc);
  expect(size.unknowns).toBeLessThanOrEqual(MAX_UNKNOWNS_IMPLIED);
  expect(size.denseEntries).toBeLessThanOrEqual(LIMITS.maxDenseEntries);
  if (size.unknowns + size.denseEntries > BUILD_BUDGET) return 'accepted';
  // Accepted means usable: the operator builds and one apply / adjoint gives finite numbers.
  const A = buildOperator(desc);
  const x = new Float64Array(2 * A.cols).fill(1);
  const y = new Float64Array(2 * A.rows);
  A.apply(x, y);
  A.adjoint(y, x);
  expect(y.every(Number.isFinite) && x.every(Number.isFinite)).toBe(true);
  // Solvers need a finite positive bound (solvers/: "operator.normBound must be a finite positive bound").
  // Their step sizes divide by the bound squared, which must stay a positive finite float64 too.
  expect(Number.isFinite(A.normBound) && A.normBound > 0 && Number.isFinite(1 / A.normBound ** 2)).toBe(true);
  return 'built';
}

function operatorAccepted(raw: unknown): boolean {
  try {
    parseOperatorDescription(raw);
    return true;
  } catch {
    return false;
  }
}

function fieldsOf(edit: Edit, prefix: string[] = []): { edited: string; holder: string } {
  const path = [...prefix, ...edit.path];
  return edit.kind === 'add' ? { edited: dotted([...path, edit.key]), holder: dotted(path) } : { edited: dotted(path), holder: dotted(path.slice(0, -1)) };
}

function count(map: Map<string, number>, key: string): void {
  map.set(key, (map.get(key) ?? 0) + 1);
}

describe('operator-description validator under hostile descriptions', () => {
  it('near-valid descriptions of every kind: refused with a field path, or accepted within the limits and buildable', () => {
    const verdicts = new Map<string, number>();
    fc.assert(
      fc.property(operatorDescription, (d) => count(verdicts, judgeOperator(d))),
      fuzzRuns({ ci: 1500, report: 20_000, soak: 300_000 }),
    );
    expect(verdicts.get('built') ?? 0).toBeGreaterThan(0);
    expect(verdicts.get('refused') ?? 0).toBeGreaterThan(0);
    recordFigures('operator validator: near-valid descriptions', { inputs: sum(verdicts), crashes: 0, ...Object.fromEntries(verdicts) });
  });

  it('hostile edits (wrong types, NaN, infinities, huge and negative sizes, deep nesting): the error names the edited field', () => {
    const verdicts = new Map<string, number>();
    const edited = operatorDescription.chain((d) => editOf(d).map((edit) => ({ d, edit })));
    fc.assert(
      // The error must point at the edit only when the description was valid before it.
      fc.property(edited, ({ d, edit }) => count(verdicts, judgeOperator(applyEdit(d, edit), operatorAccepted(d) ? fieldsOf(edit) : undefined))),
      fuzzRuns({ ci: 2500, report: 50_000, soak: 500_000 }),
    );
    recordFigures('operator validator: hostile field edits', { inputs: sum(verdicts), crashes: 0, ...Object.fromEntries(verdicts) });
  });

  it('sizes at and beyond every limit are refused before anything is allocated', () => {
    const verdicts = new Map<string, number>();
    const huge = fc.oneof(
      fc.constantFrom(LIMITS.maxSize + 1, 2 ** 31, 2 ** 32, 2 ** 53, -1, 0, 1e308, Infinity, Number.NaN),
      fc.integer({ min: LIMITS.maxSize + 1, max: 2 ** 40 }),
    );
    const oversized = fc.oneof(
      huge.map((n) => ({ kind: 'sampling', n, samples: { law: 'uniform', m: 4, seed: 1 } })),
      huge.map((m) => ({ kind: 'partial_dft', n: 64, samples: { law: 'uniform', m, seed: 1 } })),
      huge.map((n) => ({ kind: 'gabor', n, window: { kind: 'steinhaus', seed: 1 } })),
      fc.integer({ min: LIMITS.maxGaborSize + 1, max: LIMITS.maxSize }).map((n) => ({ kind: 'gabor', n, window: { kind: 'steinhaus', seed: 1 } })),
      fc.tuple(fc.integer({ min: 2049, max: LIMITS.maxSize }), fc.integer({ min: 2049, max: LIMITS.maxSize })).map(([rows, cols]) => ({ kind: 'gaussian', rows, cols, seed: 1 })),
      huge.map((rows) => ({ kind: 'bernoulli', rows, cols: 8, seed: 1 })),
      fc.integer({ min: 1, max: 10 }).map((extra) => ({ kind: 'sampling', n: 8, samples: { law: 'explicit', indices: Array.from({ length: 8 + extra }, (_, i) => i) } })),
    );
    fc.assert(
      fc.property(oversized, (d) => {
        const v = judgeOperator(d);
        count(verdicts, v);
        expect(v).toBe('refused');
      }),
      fuzzRuns({ ci: 500, report: 10_000, soak: 100_000 }),
    );
    recordFigures('operator validator: sizes beyond the limits', { inputs: sum(verdicts), crashes: 0, refused: verdicts.get('refused') ?? 0 });
  });

  it('former counterexamples stay refused, naming the field', () => {
    // Found by the properties above; each was accepted once and made every frame of its stream fail.
    const cases: Array<[object, string]> = [
      [{ kind: 'gabor', n: 2, window: { kind: 'explicit', re: [0, 0], im: [0, -5e-324] } }, 'window.im'],
      [{ kind: 'matrix', rows: 1, cols: 2, re: [0, 0] }, 're'],
      [{ kind: 'matrix', rows: 1, cols: 2, re: [1e308, 1e308] }, 're'],
      [{ kind: 'matrix', rows: 1, cols: 2, re: [1, 0], im: [0, -1.3407807929942597e154] }, 'im'],
      [{ kind: 'matrix', rows: 1, cols: 2, re: [3, 0], im: [0, -3.2733906078961426e150] }, 'im'],
      [{ kind: 'matrix', rows: 1, cols: 2, re: [1e-160, 0] }, 're'],
    ];
    for (const [description, field] of cases) {
      expect(() => parseOperatorDescription(description)).toThrow(expect.objectContaining({ field }));
      expect(judgeOperator(description)).toBe('refused');
    }
  });

  it('arbitrary values of any shape are refused cleanly', () => {
    let inputs = 0;
    fc.assert(
      fc.property(fc.anything({ maxDepth: 4, withBigInt: true, withTypedArray: true, withNullPrototype: true, withMap: true, withSet: true, withDate: true, withBoxedValues: true, withSparseArray: true }), (value) => {
        inputs++;
        judgeOperator(value);
      }),
      fuzzRuns({ ci: 1500, report: 20_000, soak: 200_000 }),
    );
    recordFigures('operator validator: arbitrary values', { inputs, crashes: 0 });
  });
});

describe('stream-declaration validator under hostile declarations', () => {
  /** Runs a declaration through what the daemon runs: the protocol envelope, then operator and solver. */
  function judgeDeclaration(raw: Record<string, unknown>, edit?: Edit): 'accepted' | 'refused_envelope' | 'refused_operator' | 'refused_solver' {
    const envelope = streamDeclarationSchema.safeParse(raw);
    if (!envelope.success) return 'refused_envelope';
    const wire = envelope.data;
    const declaration: StreamDeclaration = { ...wire, alerts: wire.alerts ?? [], queue: wire.queue ?? { ...DEFAULT_QUEUE } };
    try {
      checkDeclaration(declaration);
      return 'accepted';
    } catch (err) {
      if (!(err instanceof DeclarationError)) throw new Error(`declaration validator threw ${String(err)}`, { cause: err });
      expect(err.field.startsWith('stream.operator') || err.field.startsWith('stream.solver')).toBe(true);
      expect(err.message.length).toBeGreaterThan(0);
      if (edit) {
        const f = fieldsOf(edit, ['stream']);
        expect(related(err.field, f.edited) || related(err.field, f.holder) || err.field === 'stream.operator' || err.field === 'stream.solver').toBe(true);
      }
      return err.field.startsWith('stream.operator') ? 'refused_operator' : 'refused_solver';
    }
  }

  it('near-valid declarations: accepted, or refused with a path under stream.operator / stream.solver', () => {
    const verdicts = new Map<string, number>();
    fc.assert(
      fc.property(streamDeclaration, (d) => count(verdicts, judgeDeclaration(d))),
      fuzzRuns({ ci: 1500, report: 20_000, soak: 200_000 }),
    );
    expect(verdicts.get('accepted') ?? 0).toBeGreaterThan(0);
    recordFigures('declaration validator: near-valid declarations', { inputs: sum(verdicts), crashes: 0, ...Object.fromEntries(verdicts) });
  });

  it('hostile edits anywhere in a declaration: the error names the edited field', () => {
    const verdicts = new Map<string, number>();
    const edited = streamDeclaration.chain((d) => editOf(d).map((edit) => ({ d, edit })));
    fc.assert(
      fc.property(edited, ({ d, edit }) => count(verdicts, judgeDeclaration(applyEdit(d, edit), judgeDeclaration(d) === 'accepted' ? edit : undefined))),
      fuzzRuns({ ci: 2500, report: 50_000, soak: 500_000 }),
    );
    recordFigures('declaration validator: hostile field edits', { inputs: sum(verdicts), crashes: 0, ...Object.fromEntries(verdicts) });
  });

  it('arbitrary operator and solver values are refused cleanly', () => {
    let inputs = 0;
    const anything = fc.anything({ maxDepth: 3, withBigInt: true, withTypedArray: true, withNullPrototype: true });
    fc.assert(
      fc.property(anything, anything, solverSettings, (operator, solver, goodSolver) => {
        inputs++;
        judgeDeclaration({ name: 'x', operator, solver });
        judgeDeclaration({ name: 'x', operator: { kind: 'gaussian', rows: 4, cols: 8, seed: 1 }, solver });
        judgeDeclaration({ name: 'x', operator, solver: goodSolver });
      }),
      fuzzRuns({ ci: 1000, report: 20_000, soak: 200_000 }),
    );
    recordFigures('declaration validator: arbitrary operator and solver values', { inputs: 3 * inputs, crashes: 0 });
  });
});

function sum(m: Map<string, number>): number {
  let n = 0;
  for (const v of m.values()) n += v;
  return n;
}
