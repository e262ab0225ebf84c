import { sparseFromWire, type ResultMessage } from '../protocol/index.js';
import { resultKey } from '../clients/recording/index.js';
import { formatNumber } from './statusBoard.js';

/**
 * Comparing replayed results with recorded ones. Two results agree when their coefficients agree
 * within the tolerance (largest absolute difference over the union of supports, relative to the
 * largest recorded magnitude), their iteration counts are equal and their quality flags are the
 * same set. A recorded result with no replayed counterpart is missing.
 */
export interface ResultDifference {
  stream: string;
  seq: number;
  /** Largest |Δc| relative to the recorded scale, and where. */
  coefficientError: number;
  worstIndex: number | null;
  /** Support entries only in the replayed / only in the recorded result. */
  supportAdded: number;
  supportRemoved: number;
  flags: { recorded: string[]; replayed: string[] } | null;
  iterations: { recorded: number; replayed: number } | null;
}

export interface CheckReport {
  compared: number;
  agreeing: number;
  differences: ResultDifference[];
  missing: Array<{ stream: string; seq: number }>;
  tolerance: number;
}

interface Dense {
  values: Map<number, [number, number]>;
  scale: number;
}

function denseOf(msg: ResultMessage): Dense {
  const values = new Map<number, [number, number]>();
  let scale = 0;
  if (msg.coefficients) {
    const { indices, values: v } = sparseFromWire(msg.coefficients);
    indices.forEach((j, i) => {
      values.set(j, [v[2 * i]!, v[2 * i + 1]!]);
      scale = Math.max(scale, Math.hypot(v[2 * i]!, v[2 * i + 1]!));
    });
  }
  return { values, scale };
}

export function compareResult(recorded: ResultMessage, replayed: ResultMessage, tolerance: number): ResultDifference | null {
  const a = denseOf(recorded);
  const b = denseOf(replayed);
  let worst = 0;
  let worstIndex: number | null = null;
  for (const j of new Set([...a.values.keys(), ...b.values.keys()])) {
    const [ar, ai] = a.values.get(j) ?? [0, 0];
    const [br, bi] = b.values.get(j) ?? [0, 0];
    const d = Math.hypot(ar - br, ai - bi);
    if (d > worst) {
      worst = d;
      worstIndex = j;
    }
  }
  const relative = worst / (a.scale > 0 ? a.scale : 1);
  const supportAdded = [...b.values.keys()].filter((j) => !a.values.has(j)).length;
  const supportRemoved = [...a.values.keys()].filter((j) => !b.values.has(j)).length;
  const sameFlags = recorded.flags.length === replayed.flags.length && recorded.flags.every((f) => replayed.flags.includes(f));
  const sameIterations = recorded.evidence.iterations === replayed.evidence.iterations;
  if (relative <= tolerance && sameFlags && sameIterations) return null;
  return {
    stream: recorded.stream,
    seq: recorded.seq,
    coefficientError: relative,
    worstIndex,
    supportAdded,
    supportRemoved,
    flags: sameFlags ? null : { recorded: recorded.flags, replayed: replayed.flags },
    iterations: sameIterations ? null : { recorded: recorded.evidence.iterations, replayed: replayed.evidence.iterations },
  };
}

/**
 * Compares every recorded result of the replayed frames. `rename` maps a recorded stream name to
 * the name it was replayed under.
 */
export function compareSession(
  recorded: Map<string, ResultMessage>,
  replayed: Map<string, ResultMessage>,
  frames: Array<{ stream: string; seq: number }>,
  rename: (stream: string) => string,
  tolerance: number,
): CheckReport {
  const report: CheckReport = { compared: 0, agreeing: 0, differences: [], missing: [], tolerance };
  for (const { stream, seq } of frames) {
    const before = recorded.get(resultKey(stream, seq));
    if (!before) continue; // the recording holds no result for this frame: nothing to compare
    const after = replayed.get(resultKey(rename(stream), seq));
    if (!after) {
      report.missing.push({ stream, seq });
      continue;
    }
    report.compared++;
    const difference = compareResult(before, after, tolerance);
    if (difference) report.differences.push(difference);
    else report.agreeing++;
  }
  return report;
}

export function passed(report: CheckReport): boolean {
  return report.differences.length === 0 && report.missing.length === 0;
}

function describe(d: ResultDifference): string {
  const parts: string[] = [];
  if (d.coefficientError > 0) {
    parts.push(`coefficients differ by ${formatNumber(d.coefficientError)} (relative) at index ${d.worstIndex}`);
  }
  if (d.supportAdded > 0 || d.supportRemoved > 0) parts.push(`support +${d.supportAdded} -${d.supportRemoved}`);
  if (d.iterations) parts.push(`iterations ${d.iterations.recorded} -> ${d.iterations.replayed}`);
  if (d.flags) parts.push(`flags [${d.flags.recorded.join(',')}] -> [${d.flags.replayed.join(',')}]`);
  return `  ${d.stream} #${d.seq}: ${parts.join('; ')}`;
}

/** The diff summary printed by `replay --check`. */
export function checkSummary(report: CheckReport, maxLines = 10): string {
  const lines = [
    `check against the recording (tolerance ${report.tolerance}): ${report.compared} results compared, ${report.agreeing} agree, ${report.differences.length} differ, ${report.missing.length} missing`,
  ];
  if (report.differences.length > 0) {
    const count = (pick: (d: ResultDifference) => boolean) => report.differences.filter(pick).length;
    lines.push(
      `  differing in: coefficients ${count((d) => d.coefficientError > report.tolerance)}, iterations ${count((d) => d.iterations !== null)}, flags ${count((d) => d.flags !== null)}`,
    );
    const worst = report.differences.reduce((w, d) => (d.coefficientError > w.coefficientError ? d : w));
    lines.push(`  largest coefficient difference: ${worst.stream} #${worst.seq}, ${formatNumber(worst.coefficientError)} at index ${worst.worstIndex}`);
    lines.push('first differences:');
    lines.push(...report.differences.slice(0, maxLines).map(describe));
  }
  if (report.missing.length > 0) {
    lines.push(`missing results: ${report.missing.slice(0, maxLines).map((m) => `${m.stream} #${m.seq}`).join(', ')}${report.missing.length > maxLines ? ', ...' : ''}`);
  }
  lines.push(passed(report) ? 'check passed' : 'check FAILED: the replayed results differ from the recorded ones');
  return lines.join('\n');
}
