/**
 * Benchmark runner: `npm run bench -- <suite> [--json] [suite args...]`.
 *
 * Each suite is a module `loadtest/bench/<suite>.ts` exporting
 *   run(args: string[]): Promise<{ table: string; figures: Record<string, number> }>
 * Figures are ratios against a floor measured in the same run, never absolute times.
 * The runner prints the suite's human-readable table; with --json it then prints, as the
 * very last line, one JSON object {"suite": <name>, "figures": {...}}.
 */
import { existsSync, readdirSync } from 'node:fs';
import { fileURLToPath, pathToFileURL } from 'node:url';
import path from 'node:path';

export interface BenchResult {
  table: string;
  figures: Record<string, number>;
}

export type BenchSuite = (args: string[]) => Promise<BenchResult>;

const benchDir = path.dirname(fileURLToPath(import.meta.url));
const SUITE_NAME = /^[a-z0-9][a-z0-9_-]*$/;

function availableSuites(): string[] {
  return readdirSync(benchDir)
    .filter((f) => f.endsWith('.ts') && f !== 'main.ts' && !f.endsWith('.test.ts'))
    .map((f) => f.slice(0, -3))
    .sort();
}

function usage(message: string): never {
  process.stderr.write(
    `${message}\nusage: npm run bench -- <suite> [--json] [suite args...]\n` +
      `suites: ${availableSuites().join(', ') || '(none)'}\n`,
  );
  process.exit(2);
}

async function main(argv: string[]): Promise<void> {
  const json = argv.includes('--json');
  const rest = argv.filter((a) => a !== '--json');
  const suite = rest[0];
  if (suite === undefined) usage('missing suite name');
  if (!SUITE_NAME.test(suite)) usage(`invalid suite name "${suite}"`);
  const file = path.join(benchDir, `${suite}.ts`);
  if (!existsSync(file)) usage(`unknown suite "${suite}"`);

  const mod = (await import(pathToFileURL(file).href)) as { run?: unknown };
  if (typeof mod.run !== 'function') usage(`suite "${suite}" does not export run(args)`);
  const result = await (mod.run as BenchSuite)(rest.slice(1));

  process.stdout.write(result.table.endsWith('\n') ? result.table : `${result.table}\n`);
  if (json) process.stdout.write(`${JSON.stringify({ suite, figures: result.figures })}\n`);
}

main(process.argv.slice(2)).catch((err: unknown) => {
  process.stderr.write(`bench failed: ${err instanceof Error ? (err.stack ?? err.message) : String(err)}\n`);
  process.exit(1);
});
