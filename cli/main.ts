import { readFileSync } from 'node:fs';
import { helpText, parseCommandLine, type CommandSpec, type OptionValues } from './args.js';
import { demoCommand, demoSpec } from './demo.js';
import { EXIT } from './exitCodes.js';
import { inspectCommand, inspectSpec } from './inspect.js';
import { loadCommand, loadSpec } from './load.js';
import { recordCommand, recordSpec } from './record.js';
import { replayCommand, replaySpec } from './replay.js';
import { reportFailure } from './runtime.js';
import { sendCommand, sendSpec } from './send.js';
import { serveCommand } from './serve.js';
import { watchCommand, watchSpec } from './watch.js';

interface Command {
  spec: CommandSpec;
  run: (values: OptionValues, positionals: string[]) => Promise<number>;
}

const COMMANDS: Command[] = [
  { spec: demoSpec, run: demoCommand },
  { spec: sendSpec, run: sendCommand },
  { spec: watchSpec, run: watchCommand },
  { spec: recordSpec, run: recordCommand },
  { spec: replaySpec, run: replayCommand },
  { spec: inspectSpec, run: inspectCommand },
];

function version(): string {
  const pkg = JSON.parse(readFileSync(new URL('../package.json', import.meta.url), 'utf8')) as { version: string };
  return pkg.version;
}

function overview(): string {
  const rows: Array<[string, string]> = [
    ['serve', 'run the daemon (see sparsewire serve --help)'],
    ...COMMANDS.map((c): [string, string] => [c.spec.name, c.spec.summary]),
    [loadSpec.name, loadSpec.summary],
    ['help', 'help on one command: sparsewire help <command>'],
  ];
  return [
    'usage: sparsewire <command> [options]',
    '',
    'Live recovery of sparse signals from streams of compressed sensor measurements.',
    '',
    'commands:',
    ...rows.map(([name, summary]) => `  ${name.padEnd(9)}${summary}`),
    '',
    'Every command takes --help. Exit codes, the same for every command:',
    `  ${EXIT.ok}  done as asked`,
    `  ${EXIT.failure}  failed at run time (daemon unreachable, I/O error, refused frames, daemon error)`,
    `  ${EXIT.usage}  wrong command line`,
    `  ${EXIT.regression}  replay --check found results that differ from the recording`,
    `  ${EXIT.damaged}  the recording is damaged or not a recording`,
    `  ${EXIT.accessRefused}  the daemon refused the access token`,
    '',
    'More: docs/cli.md',
    '',
  ].join('\n');
}

/** Runs one command line (without the program name) and resolves with its exit code. */
export async function main(argv: string[]): Promise<number> {
  const [name, ...rest] = argv;
  if (name === undefined || name === '--help' || name === '-h') {
    process.stdout.write(overview());
    return name === undefined ? EXIT.usage : EXIT.ok;
  }
  if (name === '--version') {
    process.stdout.write(`sparsewire ${version()}\n`);
    return EXIT.ok;
  }
  if (name === 'serve') return serveCommand(rest);
  if (name === 'load') return loadCommand(rest);
  if (name === 'help') {
    const topic = rest[0];
    if (topic === undefined) {
      process.stdout.write(overview());
      return EXIT.ok;
    }
    if (topic === 'serve') return serveCommand(['--help']);
    if (topic === 'load') return loadCommand(['--help']);
    const command = COMMANDS.find((c) => c.spec.name === topic);
    if (!command) return unknown(topic);
    process.stdout.write(helpText(command.spec));
    return EXIT.ok;
  }
  const command = COMMANDS.find((c) => c.spec.name === name);
  if (!command) return unknown(name);
  try {
    const parsed = parseCommandLine(command.spec, rest);
    if (parsed.help) {
      process.stdout.write(helpText(command.spec));
      return EXIT.ok;
    }
    return await command.run(parsed.values, parsed.positionals);
  } catch (err) {
    return reportFailure(name, err);
  }
}

function unknown(name: string): number {
  process.stderr.write(`sparsewire: unknown command "${name}" (commands: serve, load, ${COMMANDS.map((c) => c.spec.name).join(', ')}; see sparsewire --help)\n`);
  return EXIT.usage;
}

