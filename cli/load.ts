import os from 'node:os';
import path from 'node:path';
import type { BehindPolicy } from '../protocol/index.js';
import { REPORT_FILES, writeReport } from '../loadtest/report.js';
import { runLoad, type LoadSettings } from '../loadtest/runLoad.js';
import { FEED_KINDS, type FeedKind } from '../clients/feeds/index.js';
import { SCENARIO_NAMES, type ScenarioName } from '../loadtest/scenarios.js';
import { flag, helpText, list, num, parseCommandLine, str, UsageError, type CommandSpec, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';
import { startLocalCluster } from '../cluster/localCluster.js';
import { reportFailure, stopWhen } from './runtime.js';

export const loadSpec: CommandSpec = {
  name: 'load',
  summary: 'load-test a daemon: latency, throughput, saturation, memory; writes a report',
  description: [
    'Starts a daemon in a child process (or loads an existing one with --target), declares synthetic',
    'streams, sends their frames on fixed schedules without waiting for credit, and watches the',
    'results with one timing subscriber and some deliberately slow ones. It searches for the highest',
    'load that keeps p99 latency and loss within limits, holds 70 % of it, then overloads it',
    '(1.5× quick, 2× full). Every frame must come back solved, refused or dropped with a notice; the',
    'run fails if one does not. Writes report.json, report.md and latency.svg to --out. Loopback only; every',
    'step is bounded in time and the whole run stops by itself (--max-seconds).',
    '',
    'Scenarios: small (1000 streams of n = 512), large-dft (4 streams of n = 8192), large-gabor',
    '(4 streams on the full 128 × 128 Gabor grid), mixed (all kinds at once); or one feed with',
    'chosen sizes: --feed gearbox --n 2048 --m 256 --streams 50.',
    '--quick runs small with short steps in under two minutes; without it every scenario runs with',
    'longer steps (about 10–15 minutes). --json prints {"suite":"loadtest","figures":{...}} last.',
  ].join('\n'),
  options: [
    { name: 'quick', kind: 'flag', help: 'The short run: the small scenario, short steps, under two minutes.' },
    { name: 'json', kind: 'flag', help: 'Print the figures as one JSON line at the very end.' },
    { name: 'out', kind: 'string', value: '<dir>', help: 'Folder for the report (default: a new folder in the system temp dir).' },
    { name: 'scenario', kind: 'string', value: '<name>', multiple: true, choices: SCENARIO_NAMES, help: 'Run only these scenarios (repeat the flag for several).' },
    { name: 'streams', kind: 'int', value: '<n>', min: 1, help: 'Streams of the small scenario (default 1000), or of the --feed scenario (default 100).' },
    { name: 'feed', kind: 'string', value: '<kind>', choices: FEED_KINDS, help: 'Run a scenario of this feed with chosen sizes (--n, --m) and --streams streams (default 100).' },
    { name: 'n', kind: 'int', value: '<n>', min: 2, help: 'Signal length of the --feed streams (range: the full n × n delay-Doppler grid).' },
    { name: 'm', kind: 'int', value: '<m>', min: 1, help: 'Measurements per frame of the --feed streams (gearbox time samples, telemetry projections).' },
    { name: 'rate', kind: 'string', value: '<frames/s>', multiple: true, help: 'Run these total loads instead of searching for saturation (repeatable).' },
    { name: 'stream-rate', kind: 'string', value: '<frames/s>', multiple: true, help: 'The same, given as the rate of each stream (repeatable).' },
    { name: 'target', kind: 'string', value: '<url>', help: 'Load this running daemon instead of starting one (its CPU and memory are then not measured).' },
    { name: 'target-pid', kind: 'int', value: '<pid>', min: 1, help: "The --target daemon's process id when it runs on this machine: measure its CPU and memory." },
    { name: 'token', kind: 'string', value: '<token>', env: 'SPARSEWIRE_TOKEN', help: 'Access token for --target (needs the produce and watch roles).' },
    { name: 'workers', kind: 'int', value: '<n>', min: 1, help: 'Solver workers of the daemon started for the run (default: one per core; with --nodes, one per node).' },
    { name: 'nodes', kind: 'int', value: '<n>', min: 1, help: 'Cluster mode: start nats-server and n cluster nodes on this machine and load them; frames enter and results leave through the first node (docs/cluster.md).' },
    { name: 'streams-per-connection', kind: 'int', value: '<n>', min: 1, help: 'Streams per producer connection (default 250; the started daemon allows that many).' },
    { name: 'slow', kind: 'int', value: '<n>', min: 0, help: 'Slow subscribers (default 2; policies keep_latest, drop_with_notice, disconnect in turn).' },
    { name: 'slow-read-kib', kind: 'number', value: '<KiB/s>', min: 1, help: 'How fast each slow subscriber reads (default 256).' },
    { name: 'p99-limit-ms', kind: 'number', value: '<ms>', min: 0, help: 'A step fails when its p99 latency is above this (default 100).' },
    { name: 'loss-limit-percent', kind: 'number', value: '<percent>', min: 0, help: 'A step fails when more frames than this are refused or dropped (default 0.1).' },
    { name: 'other-cpu-limit-percent', kind: 'number', value: '<percent>', min: 0, help: 'A step during which other programs took more CPU (% of one core) is disturbed and tried again (default 25).' },
    { name: 'step-seconds', kind: 'number', value: '<s>', min: 0.5, help: 'Length of each search step (default 3 quick, 8 full).' },
    { name: 'hold-seconds', kind: 'number', value: '<s>', min: 0.5, help: 'Length of the run at 70 % of saturation (default 8 quick, 20 full).' },
    { name: 'max-seconds', kind: 'number', value: '<s>', min: 5, help: 'Start no new step after this long (default 95 quick, 900 full).' },
  ],
};

const SLOW_POLICY_ORDER: BehindPolicy[] = ['keep_latest', 'drop_with_notice', 'disconnect'];

/** The settings of a run from the command line: presets for --quick and the full run, then overrides. */
export function loadSettings(values: OptionValues, log: (line: string) => void): { settings: LoadSettings; outDir: string; json: boolean } {
  const quick = flag(values, 'quick');
  const scenarios = list(values, 'scenario') as ScenarioName[];
  const rates = positiveNumbers(values, 'rate');
  const streamRates = positiveNumbers(values, 'stream-rate');
  if (rates.length > 0 && streamRates.length > 0) throw new UsageError('give --rate or --stream-rate, not both');
  const feed = str(values, 'feed') as FeedKind | undefined;
  for (const size of ['n', 'm']) {
    if (num(values, size) !== undefined && feed === undefined) throw new UsageError(`--${size} goes with --feed`);
  }
  const target = str(values, 'target');
  if (target !== undefined) {
    try {
      new URL(target);
    } catch {
      throw new UsageError(`--target must be an address like http://127.0.0.1:8720, got "${target}"`);
    }
  }
  if (num(values, 'target-pid') !== undefined && target === undefined) throw new UsageError('--target-pid goes with --target');
  if (num(values, 'nodes') !== undefined && target !== undefined) throw new UsageError('give --nodes or --target, not both');
  const slowCount = num(values, 'slow') ?? 2;
  const token = str(values, 'token');
  const targetPid = num(values, 'target-pid');
  const stepSeconds = num(values, 'step-seconds') ?? (quick ? 3 : 8);
  const settings: LoadSettings = {
    mode: quick ? 'quick' : 'full',
    scenarios: feed !== undefined ? [...scenarios, 'custom'] : scenarios.length > 0 ? scenarios : quick ? ['small'] : [...SCENARIO_NAMES],
    smallStreams: num(values, 'streams') ?? 1000,
    ...(feed !== undefined
      ? { custom: { feed, streams: num(values, 'streams') ?? 100, ...(num(values, 'n') !== undefined ? { n: num(values, 'n')! } : {}), ...(num(values, 'm') !== undefined ? { m: num(values, 'm')! } : {}) } }
      : {}),
    target: target === undefined ? null : { url: target, ...(token ? { token } : {}), ...(targetPid ? { pid: targetPid } : {}) },
    ...(num(values, 'workers') !== undefined ? { workers: num(values, 'workers')! } : {}),
    streamsPerConnection: num(values, 'streams-per-connection') ?? 250,
    slowPolicies: Array.from({ length: slowCount }, (_, i) => SLOW_POLICY_ORDER[i % SLOW_POLICY_ORDER.length]!),
    slowBytesPerSecond: (num(values, 'slow-read-kib') ?? 256) * 1024,
    limits: {
      p99LimitMs: num(values, 'p99-limit-ms') ?? 100,
      lossLimit: (num(values, 'loss-limit-percent') ?? 0.1) / 100,
      drainTimeoutMs: 30_000,
      otherCpuLimitPercent: num(values, 'other-cpu-limit-percent') ?? 25,
    },
    search: { growth: 1.6, precision: quick ? 0.15 : 0.08, maxSteps: quick ? 10 : 14, maxAttempts: quick ? 2 : 3, quietWaitMs: quick ? 5_000 : 30_000, stepSeconds, settleSeconds: Math.min(1, stepSeconds / 4) },
    warmupSeconds: quick ? 3 : 5,
    holdSeconds: num(values, 'hold-seconds') ?? (quick ? 8 : 20),
    overloadFactor: quick ? 1.5 : 2,
    overloadSeconds: quick ? 3 : 15,
    fixedRates: rates.length > 0 ? { values: rates, perStream: false } : streamRates.length > 0 ? { values: streamRates, perStream: true } : null,
    deadlineSeconds: num(values, 'max-seconds') ?? (quick ? 95 : 900),
    log,
  };
  const stamp = new Date().toISOString().replace(/[:.]/g, '-');
  const outDir = path.resolve(str(values, 'out') ?? path.join(os.tmpdir(), `sparsewire-load-${stamp}`));
  return { settings, outDir, json: flag(values, 'json') };
}

function positiveNumbers(values: OptionValues, name: string): number[] {
  return list(values, name).map((text) => {
    const v = Number(text);
    if (text.trim() === '' || !Number.isFinite(v) || v <= 0) throw new UsageError(`--${name} must be a positive number of frames per second, got "${text}"`);
    return v;
  });
}

/** `sparsewire load`: resolves with the exit code (1 when a frame went unaccounted or a scenario broke). */
export async function loadCommand(argv: string[]): Promise<number> {
  const stop = stopWhen();
  try {
    const parsed = parseCommandLine(loadSpec, argv);
    if (parsed.help) {
      process.stdout.write(helpText(loadSpec));
      return EXIT.ok;
    }
    const log = (line: string) => process.stderr.write(`${line}\n`);
    const { settings, outDir, json } = loadSettings(parsed.values, log);
    const report = await withLocalCluster(num(parsed.values, 'nodes'), settings, log, (s) => runLoad({ ...s, signal: stop.signal }));
    const files = writeReport(outDir, report);
    for (const s of report.scenarios) {
      log(`${s.name}: saturation ${s.saturation_fps?.toFixed(0) ?? '–'} frames/s; p99 at 70 % ${s.at_70pct ? `${s.at_70pct.latency_ms.p99.toFixed(1)} ms` : '–'}; daemon peak ${s.daemon_peak_rss_mb?.toFixed(0) ?? '–'} MiB`);
    }
    process.stdout.write(`report: ${path.join(outDir, REPORT_FILES.markdown)} (also ${files.length - 1} more files there)\n`);
    for (const problem of report.problems) process.stderr.write(`problem: ${problem}\n`);
    if (!report.accounting_ok) process.stderr.write(`sparsewire load: ACCOUNTING FAILED: ${report.figures.unaccounted_frames} frames not accounted for\n`);
    if (json) process.stdout.write(`${JSON.stringify({ suite: 'loadtest', figures: report.figures })}\n`);
    return report.accounting_ok && report.problems.length === 0 ? EXIT.ok : EXIT.failure;
  } catch (err) {
    return reportFailure('load', err);
  } finally {
    stop.dispose();
  }
}

/**
 * With --nodes: the run's daemon is a local cluster (nats-server and that many nodes, child
 * processes), loaded through its first node as a --target whose CPU and memory are measured.
 */
async function withLocalCluster<T>(nodes: number | undefined, settings: LoadSettings, log: (line: string) => void, run: (s: LoadSettings) => Promise<T>): Promise<T> {
  if (nodes === undefined) return run(settings);
  const nodeArgs = ['--log-level', 'error', '--workers', String(settings.workers ?? 1), '--max-streams-per-connection', String(settings.streamsPerConnection)];
  const cluster = await startLocalCluster(nodes, nodeArgs);
  log(`cluster: nats-server at ${cluster.natsUrl}, ${nodes} node(s); loading ${cluster.nodes[0]!.url}`);
  try {
    return await run({ ...settings, target: { url: cluster.nodes[0]!.url, pid: cluster.nodes[0]!.pid } });
  } finally {
    await cluster.stop();
  }
}
