import { parseArgs } from 'node:util';

/**
 * A small declarative layer over node:util parseArgs: each command lists its options once, and
 * both parsing (with typed conversion and clear errors) and `--help` come from that list.
 */
export type OptionKind = 'string' | 'number' | 'int' | 'flag';

export interface OptionSpec {
  name: string;
  kind: OptionKind;
  /** What to show after the flag in help, e.g. '<seconds>'. */
  value?: string;
  help: string;
  /** Environment variable consulted when the flag is absent. */
  env?: string;
  /** Allowed values for string options. */
  choices?: readonly string[];
  /** Smallest allowed value for number/int options. */
  min?: number;
  /** A string option that may be given several times (its value is a list). */
  multiple?: boolean;
}

export interface CommandSpec {
  name: string;
  summary: string;
  /** Positional arguments in the usage line, e.g. '<recording>'. */
  positionals?: string;
  /** Paragraphs after the usage line. */
  description: string;
  options: OptionSpec[];
}

export type OptionValues = Record<string, string | number | boolean | string[] | undefined>;

/** A wrong command line; the message names the option. */
export class UsageError extends Error {
  override readonly name = 'UsageError';
}

/** Options every command that talks to a daemon understands. */
export const DAEMON_OPTIONS: OptionSpec[] = [
  { name: 'daemon', kind: 'string', value: '<url>', env: 'SPARSEWIRE_DAEMON', help: 'The daemon to talk to (default http://127.0.0.1:8720).' },
  { name: 'token', kind: 'string', value: '<token>', env: 'SPARSEWIRE_TOKEN', help: 'Access token (sent as a Bearer header).' },
];

export const DEFAULT_DAEMON = 'http://127.0.0.1:8720';

export function parseCommandLine(
  spec: CommandSpec,
  argv: string[],
  env: NodeJS.ProcessEnv = process.env,
): { help: true } | { help: false; values: OptionValues; positionals: string[] } {
  let parsed;
  try {
    parsed = parseArgs({
      args: argv,
      strict: true,
      allowPositionals: spec.positionals !== undefined,
      options: {
        help: { type: 'boolean', short: 'h' },
        ...Object.fromEntries(
          spec.options.map((o) => [o.name, { type: o.kind === 'flag' ? ('boolean' as const) : ('string' as const), multiple: o.multiple === true }]),
        ),
      },
    });
  } catch (err) {
    throw new UsageError((err as Error).message.replace(/\. To specify a positional argument.*$/s, '.'));
  }
  if (parsed.values.help) return { help: true };
  const values: OptionValues = {};
  for (const o of spec.options) {
    const raw = (parsed.values as Record<string, string | boolean | string[] | undefined>)[o.name];
    if (Array.isArray(raw)) {
      values[o.name] = raw.map((r) => convert(o, r, `--${o.name}`) as string);
      continue;
    }
    const fromEnv = o.env ? env[o.env] : undefined;
    if (raw !== undefined) values[o.name] = convert(o, raw, `--${o.name}`);
    else if (fromEnv !== undefined && fromEnv !== '') values[o.name] = convert(o, fromEnv, o.env!);
  }
  return { help: false, values, positionals: parsed.positionals };
}

function convert(o: OptionSpec, raw: string | boolean, source: string): string | number | boolean {
  if (o.kind === 'flag') {
    if (typeof raw === 'boolean') return raw;
    if (/^(1|true|yes)$/i.test(raw)) return true;
    if (/^(0|false|no)$/i.test(raw)) return false;
    throw new UsageError(`${source} must be 1/true/yes or 0/false/no, got "${raw}"`);
  }
  const text = String(raw);
  if (o.kind === 'string') {
    if (o.choices && !o.choices.includes(text)) throw new UsageError(`${source} must be one of ${o.choices.join(', ')}; got "${text}"`);
    return text;
  }
  const value = Number(text);
  if (text.trim() === '' || !Number.isFinite(value)) throw new UsageError(`${source} must be a number, got "${text}"`);
  if (o.kind === 'int' && !Number.isInteger(value)) throw new UsageError(`${source} must be a whole number, got "${text}"`);
  if (o.min !== undefined && value < o.min) throw new UsageError(`${source} must be at least ${o.min}, got ${text}`);
  return value;
}

export function helpText(spec: CommandSpec): string {
  const left = (o: OptionSpec) => `  --${o.name}${o.value ? ` ${o.value}` : ''}`;
  const width = Math.max(...spec.options.map((o) => left(o).length), 10) + 2;
  const lines = spec.options.map((o) => {
    const extra = [o.choices ? `one of: ${o.choices.join(', ')}` : '', o.env ? `env ${o.env}` : ''].filter(Boolean).join('; ');
    return `${left(o).padEnd(width)}${o.help}${extra ? `\n${' '.repeat(width)}(${extra})` : ''}`;
  });
  return [
    `usage: sparsewire ${spec.name} [options]${spec.positionals ? ` ${spec.positionals}` : ''}`,
    '',
    spec.description,
    '',
    'options:',
    ...lines,
    `${'  --help'.padEnd(width)}This text.`,
    '',
    'Exit codes: see sparsewire --help.',
    '',
  ].join('\n');
}

/** Numbers of an OptionValues map, typed. */
export function num(values: OptionValues, name: string): number | undefined {
  const v = values[name];
  return typeof v === 'number' ? v : undefined;
}

export function str(values: OptionValues, name: string): string | undefined {
  const v = values[name];
  return typeof v === 'string' ? v : undefined;
}

export function list(values: OptionValues, name: string): string[] {
  const v = values[name];
  return Array.isArray(v) ? v : [];
}

export function flag(values: OptionValues, name: string): boolean {
  return values[name] === true;
}
