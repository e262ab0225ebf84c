import type { MachineDescription } from '../machine.js';

/**
 * Turns what one hardening run recorded into the figures block of docs/reliability.md: one row
 * per attack or fault with every figure its suite recorded, plus how the run went.
 */

export interface FigureLine {
  attack: string;
  scale: string;
  seed: number;
  figures: Record<string, number | string | boolean>;
}

export interface SuiteOutcome {
  file: string;
  passed: number;
  failed: number;
  seconds: number;
}

export interface HardenRun {
  scale: string;
  seed: number;
  started: string;
  seconds: number;
  machine: MachineDescription;
  suites: SuiteOutcome[];
  lines: FigureLine[];
}

export const BEGIN_MARK = '<!-- harden:figures:begin (written by npm run harden -- --update-doc) -->';
export const END_MARK = '<!-- harden:figures:end -->';

/** Sum of the input counts a row reports (whatever its suite calls them). */
const INPUT_KEYS = ['inputs', 'messages_per_endpoint', 'requests', 'frames_flooded', 'results_pushed', 'connections', 'faults', 'frames_sent', 'guesses', 'silent_peers', 'tokens_presented', 'declarations_at_once', 'ops'];

function inputsOf(figures: FigureLine['figures']): string {
  for (const key of INPUT_KEYS) if (typeof figures[key] === 'number') return `${figures[key]} ${key.replace(/_/g, ' ')}`;
  return '';
}

function formatFigures(figures: FigureLine['figures']): string {
  return Object.entries(figures)
    .map(([k, v]) => `${k.replace(/_/g, ' ')} ${typeof v === 'number' ? formatNumber(v) : String(v)}`)
    .join(' · ');
}

function formatNumber(v: number): string {
  return Number.isInteger(v) ? v.toLocaleString('en-US').replace(/,/g, ' ') : String(v);
}

export function renderReport(run: HardenRun): string {
  const passed = run.suites.reduce((n, s) => n + s.passed, 0);
  const failed = run.suites.reduce((n, s) => n + s.failed, 0);
  const m = run.machine;
  const out = [
    BEGIN_MARK,
    '',
    `Run of ${run.started} at scale \`${run.scale}\`, seed ${run.seed}: ${passed} checks passed, ${failed} failed, ${Math.round(run.seconds)} s in all.`,
    `Machine: ${m.cpu_model}, ${m.logical_cpus} logical CPUs, ${m.memory_gib} GiB, ${m.os}, Node ${m.node}; load average ${m.load_average_start.join(' / ')} at the start.`,
    '',
    '| attack or fault | inputs | what held (figures recorded by the suite) |',
    '|---|---|---|',
    ...run.lines.map((l) => `| ${l.attack} | ${inputsOf(l.figures)} | ${formatFigures(l.figures)} |`),
    '',
    '| suite | checks passed | failed | seconds |',
    '|---|---|---|---|',
    ...run.suites.map((s) => `| \`${s.file}\` | ${s.passed} | ${s.failed} | ${Math.round(s.seconds)} |`),
    '',
    END_MARK,
  ];
  return out.join('\n');
}

/** Replaces the figures block of a document (between the marks) with `block`. */
export function replaceFigures(doc: string, block: string): string {
  const begin = doc.indexOf(BEGIN_MARK);
  const end = doc.indexOf(END_MARK);
  if (begin < 0 || end < begin) throw new Error('the document has no figures block (its begin and end marks are missing)');
  return doc.slice(0, begin) + block + doc.slice(end + END_MARK.length);
}
