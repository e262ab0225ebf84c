/**
 * The reliability runner: `npm run harden` (scale `report`, three to five minutes on two
 * cores) and `npm run soak` (scale `soak`, hours). It runs the fuzz, fault and attack suites of
 * test/hardening in vitest with more inputs than CI, collects the figures each suite records,
 * prints them as the figures block of docs/reliability.md, and with --update-doc writes that
 * block into the document. Exits non-zero when any check failed or the run hit its deadline.
 *
 *   npm run harden [-- --update-doc] [--seed <n>] [--only <file filter>]
 *   npm run soak   [-- --seed <n>]
 */
import { spawn } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync, existsSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseArgs } from 'node:util';
import { describeMachine, finishMachine } from '../machine.js';
import { renderReport, replaceFigures, type FigureLine, type HardenRun, type SuiteOutcome } from './report.js';

const REPO_ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');
const DOC = path.join(REPO_ROOT, 'docs', 'reliability.md');

/** Whole-run deadline and per-test timeout for each scale (the suites themselves are bounded by counts). */
const BOUNDS = {
  report: { deadlineMin: 20, testTimeoutMin: 10 },
  soak: { deadlineMin: 240, testTimeoutMin: 120 },
} as const;

interface VitestJson {
  testResults: Array<{ name: string; startTime: number; endTime: number; assertionResults: Array<{ status: string; fullName: string; failureMessages: string[] }> }>;
}

async function main(): Promise<number> {
  const { values } = parseArgs({
    options: {
      scale: { type: 'string', default: 'report' },
      seed: { type: 'string' },
      only: { type: 'string' },
      'update-doc': { type: 'boolean', default: false },
    },
  });
  const scale = values.scale as keyof typeof BOUNDS;
  if (!(scale in BOUNDS)) throw new Error(`--scale must be report or soak, got "${values.scale}"`);
  const bounds = BOUNDS[scale];
  const work = mkdtempSync(path.join(os.tmpdir(), 'sparsewire-harden-'));
  const figuresFile = path.join(work, 'figures.jsonl');
  const vitestFile = path.join(work, 'vitest.json');
  writeFileSync(figuresFile, '');
  const machine = describeMachine();
  const started = new Date();

  const args = [
    path.join(REPO_ROOT, 'node_modules', 'vitest', 'vitest.mjs'),
    'run',
    values.only ? `test/hardening/${values.only}` : 'test/hardening',
    '--reporter=default',
    '--reporter=json',
    `--outputFile.json=${vitestFile}`,
    `--testTimeout=${bounds.testTimeoutMin * 60_000}`,
    `--hookTimeout=${bounds.testTimeoutMin * 60_000}`,
  ];
  const env = {
    ...process.env,
    SPARSEWIRE_HARDEN_SCALE: scale,
    SPARSEWIRE_HARDEN_FIGURES: figuresFile,
    ...(values.seed ? { SPARSEWIRE_HARDEN_SEED: values.seed } : {}),
  };
  const child = spawn(process.execPath, args, { cwd: REPO_ROOT, env, stdio: ['ignore', 'inherit', 'inherit'] });
  let timedOut = false;
  const deadline = setTimeout(() => {
    timedOut = true;
    process.stderr.write(`harden: deadline of ${bounds.deadlineMin} min reached; stopping the suites\n`);
    child.kill('SIGTERM');
  }, bounds.deadlineMin * 60_000);
  const code = await new Promise<number>((resolve) => child.once('exit', (c) => resolve(c ?? 1)));
  clearTimeout(deadline);

  // Suites run in parallel: sort their lines so that the report's rows keep one order.
  const lines = readFileSync(figuresFile, 'utf8')
    .split('\n')
    .filter(Boolean)
    .map((l) => JSON.parse(l) as FigureLine)
    .sort((a, b) => a.attack.localeCompare(b.attack));
  const suites: SuiteOutcome[] = existsSync(vitestFile)
    ? (JSON.parse(readFileSync(vitestFile, 'utf8')) as VitestJson).testResults.map((t) => ({
        file: path.relative(REPO_ROOT, t.name),
        passed: t.assertionResults.filter((a) => a.status === 'passed').length,
        failed: t.assertionResults.filter((a) => a.status !== 'passed').length,
        seconds: (t.endTime - t.startTime) / 1000,
      }))
    : [];
  suites.sort((a, b) => a.file.localeCompare(b.file));
  const run: HardenRun = {
    scale,
    seed: lines[0]?.seed ?? Number(values.seed ?? NaN),
    started: started.toISOString().replace(/\.\d+Z$/, 'Z'),
    seconds: (Date.now() - started.getTime()) / 1000,
    machine: finishMachine(machine),
    suites,
    lines,
  };
  const block = renderReport(run);
  process.stdout.write(`\n${block}\n`);
  writeFileSync(path.join(work, 'run.json'), JSON.stringify(run, null, 2));
  process.stdout.write(`\nfigures and vitest output kept in ${work}\n`);
  const failed = code !== 0 || timedOut || suites.some((s) => s.failed > 0);
  if (values['update-doc']) {
    if (failed) {
      process.stderr.write('harden: not updating docs/reliability.md from a failed run\n');
    } else {
      writeFileSync(DOC, replaceFigures(readFileSync(DOC, 'utf8'), block));
      process.stdout.write('docs/reliability.md updated\n');
    }
  }
  return failed ? 1 : 0;
}

main().then(
  (code) => (process.exitCode = code),
  (err: Error) => {
    process.stderr.write(`harden: ${err.message}\n`);
    process.exitCode = 2;
  },
);
