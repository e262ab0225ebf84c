import { readFileSync } from 'node:fs';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { startClusterNode } from '../cluster/index.js';
import { type DaemonConfig, type RunningDaemon, type TokenGrant, startDaemon } from '../daemon/index.js';

/**
 * `sparsewire serve`: runs the daemon. Settings come from command-line flags, then
 * SPARSEWIRE_* environment variables, then a JSON config file (--config), then defaults — the
 * first that gives a value wins. Prints `sparsewire listening on <url>` on stdout once ready;
 * logs (JSON lines) go to stderr. SIGINT/SIGTERM shut down gracefully.
 */

type Kind = 'string' | 'int' | 'flag';

interface OptionSpec {
  flag: string;
  env: string;
  kind: Kind;
  /** Where the value goes: a DaemonConfig key, a limits key, or a special handled below. */
  target: string;
  help: string;
}

const OPTIONS: OptionSpec[] = [
  { flag: 'host', env: 'SPARSEWIRE_HOST', kind: 'string', target: 'host', help: 'Address to listen on (default 127.0.0.1; 0.0.0.0 for every interface).' },
  { flag: 'port', env: 'SPARSEWIRE_PORT', kind: 'int', target: 'port', help: 'TCP port for HTTP and WebSocket (default 8720; 0 picks a free one).' },
  { flag: 'workers', env: 'SPARSEWIRE_WORKERS', kind: 'int', target: 'workers', help: 'Solver worker threads (default: the number of cores).' },
  { flag: 'state-dir', env: 'SPARSEWIRE_STATE_DIR', kind: 'string', target: 'stateDir', help: 'Directory where stream declarations persist (default .sparsewire-state).' },
  { flag: 'no-state', env: 'SPARSEWIRE_NO_STATE', kind: 'flag', target: 'noState', help: 'Do not persist declarations (streams are forgotten on restart).' },
  { flag: 'tokens-file', env: 'SPARSEWIRE_TOKENS_FILE', kind: 'string', target: 'tokensFile', help: 'JSON file listing access tokens [{token, roles, streams?, name?}]; none = open access.' },
  { flag: 'tls-cert', env: 'SPARSEWIRE_TLS_CERT', kind: 'string', target: 'tlsCert', help: 'PEM certificate file: serve HTTPS/WSS (needs --tls-key).' },
  { flag: 'tls-key', env: 'SPARSEWIRE_TLS_KEY', kind: 'string', target: 'tlsKey', help: 'PEM private key file for --tls-cert.' },
  { flag: 'static-dir', env: 'SPARSEWIRE_STATIC_DIR', kind: 'string', target: 'staticDir', help: 'Dashboard files served under / (default clients/web when present).' },
  { flag: 'no-static', env: 'SPARSEWIRE_NO_STATIC', kind: 'flag', target: 'noStatic', help: 'Serve no dashboard files.' },
  { flag: 'heartbeat-ms', env: 'SPARSEWIRE_HEARTBEAT_MS', kind: 'int', target: 'heartbeatMs', help: 'Ping interval; a peer whose answer is overdue is dropped (default 15000).' },
  { flag: 'shutdown-grace-ms', env: 'SPARSEWIRE_SHUTDOWN_GRACE_MS', kind: 'int', target: 'shutdownGraceMs', help: 'Longest wait for accepted frames when stopping (default 10000).' },
  { flag: 'retained-results', env: 'SPARSEWIRE_RETAINED_RESULTS', kind: 'int', target: 'retainedResults', help: 'Results kept per stream for subscribers that resume (default 32).' },
  { flag: 'max-message-bytes', env: 'SPARSEWIRE_MAX_MESSAGE_BYTES', kind: 'int', target: 'limits.maxMessageBytes', help: 'Largest WebSocket message; larger closes the connection (default 4194304).' },
  { flag: 'max-streams-per-connection', env: 'SPARSEWIRE_MAX_STREAMS_PER_CONNECTION', kind: 'int', target: 'limits.maxStreamsPerConnection', help: 'Streams one producer connection may declare (default 64).' },
  { flag: 'max-connections-per-token', env: 'SPARSEWIRE_MAX_CONNECTIONS_PER_TOKEN', kind: 'int', target: 'limits.maxConnectionsPerToken', help: 'Open connections per access token (default 64).' },
  { flag: 'max-subscriptions-per-connection', env: 'SPARSEWIRE_MAX_SUBSCRIPTIONS_PER_CONNECTION', kind: 'int', target: 'limits.maxSubscriptionsPerConnection', help: 'Subscriptions per subscriber connection (default 16).' },
  { flag: 'outbox-high-bytes', env: 'SPARSEWIRE_OUTBOX_HIGH_BYTES', kind: 'int', target: 'limits.outboxHighBytes', help: 'Unsent bytes at which a subscriber counts as behind (default 1048576).' },
  { flag: 'outbox-low-bytes', env: 'SPARSEWIRE_OUTBOX_LOW_BYTES', kind: 'int', target: 'limits.outboxLowBytes', help: 'Unsent bytes below which it has caught up (default 262144).' },
  { flag: 'outbox-hard-cap-bytes', env: 'SPARSEWIRE_OUTBOX_HARD_CAP_BYTES', kind: 'int', target: 'limits.outboxHardCapBytes', help: 'Unsent bytes that terminate a connection (default 16777216).' },
  { flag: 'outbox-max-notices', env: 'SPARSEWIRE_OUTBOX_MAX_NOTICES', kind: 'int', target: 'limits.outboxMaxNotices', help: 'Alerts and stream events held for a subscriber that is behind (default 1000).' },
  { flag: 'max-queued-bytes', env: 'SPARSEWIRE_MAX_QUEUED_BYTES', kind: 'int', target: 'limits.maxQueuedBytes', help: 'Measurement bytes all queues may hold before reading from producers pauses (default 268435456).' },
  { flag: 'min-read-bytes-per-second', env: 'SPARSEWIRE_MIN_READ_BYTES_PER_SECOND', kind: 'int', target: 'limits.minReadBytesPerSecond', help: 'Slowest reading a live peer may do: a ping may wait behind a backlog this long to read (default 32768).' },
  { flag: 'cluster', env: 'SPARSEWIRE_CLUSTER', kind: 'string', target: 'cluster', help: 'Run as a cluster node on NATS JetStream at these URLs (comma-separated, e.g. nats://127.0.0.1:4222); see docs/cluster.md.' },
  { flag: 'cluster-prefix', env: 'SPARSEWIRE_CLUSTER_PREFIX', kind: 'string', target: 'clusterPrefix', help: 'Prefix of the cluster\'s NATS subjects, stream and buckets (default sparsewire).' },
  { flag: 'node-id', env: 'SPARSEWIRE_NODE_ID', kind: 'string', target: 'nodeId', help: 'This cluster node\'s id (default host-pid-random).' },
  { flag: 'log-level', env: 'SPARSEWIRE_LOG_LEVEL', kind: 'string', target: 'logLevel', help: 'fatal, error, warn, info (default), debug, trace or silent.' },
  { flag: 'config', env: 'SPARSEWIRE_CONFIG', kind: 'string', target: 'config', help: 'JSON file with any of these settings (camelCase keys, see docs/daemon.md).' },
];

export const DEFAULT_PORT = 8720;

export function serveHelp(): string {
  const width = Math.max(...OPTIONS.map((o) => o.flag.length + (o.kind === 'flag' ? 0 : 6))) + 4;
  const lines = OPTIONS.map((o) => {
    const left = `  --${o.flag}${o.kind === 'flag' ? '' : o.kind === 'int' ? ' <n>' : ' <s>'}`;
    return `${left.padEnd(width + 2)} ${o.help}\n${' '.repeat(width + 3)}env ${o.env}`;
  });
  return [
    'usage: sparsewire serve [options]',
    '',
    'Runs the daemon: WebSocket endpoints /v1/produce and /v1/watch, and on the same port',
    'GET /v1/health, /v1/metrics (Prometheus text), /v1/streams and the dashboard.',
    'A setting comes from its flag, else its environment variable, else --config, else its default.',
    '',
    ...lines,
    '  --help                 This text.',
    '',
  ].join('\n');
}

/** The daemon's settings, plus where its cluster is when it runs as a cluster node. */
export type ServeOptions = Partial<DaemonConfig> & { cluster?: { servers: string[]; prefix?: string; nodeId?: string } };

/** A bad setting: the message names it. */
export class ServeOptionError extends Error {}

/** Resolves the daemon configuration from flags, environment and config file. */
export function serveOptions(argv: string[], env: NodeJS.ProcessEnv = process.env): ServeOptions | 'help' {
  const parsed = parseArgs({
    args: argv,
    strict: true,
    allowPositionals: false,
    options: {
      help: { type: 'boolean' },
      ...Object.fromEntries(OPTIONS.map((o) => [o.flag, { type: o.kind === 'flag' ? ('boolean' as const) : ('string' as const) }])),
    },
  });
  const values = parsed.values as Record<string, string | boolean | undefined>;
  if (values.help) return 'help';
  const raw = new Map<string, unknown>();
  for (const o of OPTIONS) {
    const fromFlag = values[o.flag];
    const fromEnv = env[o.env];
    if (fromFlag !== undefined) raw.set(o.target, convert(o, fromFlag, `--${o.flag}`));
    else if (fromEnv !== undefined && fromEnv !== '') raw.set(o.target, convert(o, fromEnv, o.env));
  }
  const file = raw.get('config') as string | undefined;
  const fromFile = file === undefined ? {} : readConfigFile(file);
  const pick = <T>(key: string): T | undefined => (raw.has(key) ? (raw.get(key) as T) : (fromFile[key] as T | undefined));

  const config: ServeOptions = { port: DEFAULT_PORT };
  for (const key of ['host', 'port', 'workers', 'heartbeatMs', 'shutdownGraceMs', 'retainedResults', 'logLevel'] as const) {
    const v = pick(key);
    if (v !== undefined) (config as Record<string, unknown>)[key] = v;
  }
  const limits: Record<string, unknown> = { ...((fromFile.limits as object | undefined) ?? {}) };
  for (const o of OPTIONS.filter((x) => x.target.startsWith('limits.'))) {
    if (raw.has(o.target)) limits[o.target.slice('limits.'.length)] = raw.get(o.target);
  }
  if (Object.keys(limits).length > 0) config.limits = limits as unknown as DaemonConfig['limits'];

  if (pick<boolean>('noState')) config.stateDir = null;
  else {
    const dir = pick<string | null>('stateDir');
    if (dir !== undefined) config.stateDir = dir === null ? null : path.resolve(dir);
  }
  if (pick<boolean>('noStatic')) config.staticDir = null;
  else {
    const dir = pick<string | null>('staticDir');
    if (dir !== undefined) config.staticDir = dir === null ? null : path.resolve(dir);
  }
  const tokensFile = pick<string>('tokensFile');
  if (tokensFile !== undefined) config.tokens = readJson(tokensFile, 'tokens file') as TokenGrant[];
  else if (fromFile.tokens !== undefined) config.tokens = fromFile.tokens as TokenGrant[];
  const cert = raw.get('tlsCert') ?? (fromFile.tls as { cert?: string } | undefined)?.cert;
  const key = raw.get('tlsKey') ?? (fromFile.tls as { key?: string } | undefined)?.key;
  if (cert !== undefined || key !== undefined) {
    if (cert === undefined || key === undefined) throw new ServeOptionError('TLS needs both --tls-cert and --tls-key');
    config.tls = { cert: path.resolve(cert as string), key: path.resolve(key as string) };
  }
  const cluster = pick<string>('cluster');
  if (cluster !== undefined) {
    const prefix = pick<string>('clusterPrefix');
    const nodeId = pick<string>('nodeId');
    config.cluster = { servers: cluster.split(',').map((u) => u.trim()).filter((u) => u !== ''), ...(prefix ? { prefix } : {}), ...(nodeId ? { nodeId } : {}) };
  }
  return config;
}

const FILE_KEYS = new Set([
  'host', 'port', 'workers', 'stateDir', 'noState', 'tokens', 'tokensFile', 'tls', 'staticDir', 'noStatic',
  'limits', 'heartbeatMs', 'shutdownGraceMs', 'retainedResults', 'logLevel', 'cluster', 'clusterPrefix', 'nodeId',
]);

function readConfigFile(file: string): Record<string, unknown> {
  const content = readJson(file, 'config file');
  if (typeof content !== 'object' || content === null || Array.isArray(content)) throw new ServeOptionError(`${file}: a config file holds one JSON object`);
  for (const k of Object.keys(content)) {
    if (!FILE_KEYS.has(k)) throw new ServeOptionError(`${file}: unknown setting "${k}" (known: ${[...FILE_KEYS].join(', ')})`);
  }
  return content as Record<string, unknown>;
}

function readJson(file: string, what: string): unknown {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (err) {
    throw new ServeOptionError(`cannot read ${what} ${file}: ${(err as Error).message}`);
  }
  try {
    return JSON.parse(text);
  } catch (err) {
    throw new ServeOptionError(`${what} ${file} is not valid JSON: ${(err as Error).message}`);
  }
}

function convert(o: OptionSpec, value: string | boolean, source: string): unknown {
  if (o.kind === 'flag') {
    if (typeof value === 'boolean') return value;
    if (/^(1|true|yes)$/i.test(value)) return true;
    if (/^(0|false|no)$/i.test(value)) return false;
    throw new ServeOptionError(`${source} must be 1/true/yes or 0/false/no, got "${value}"`);
  }
  if (o.kind === 'int') {
    if (!/^\d+$/.test(String(value))) throw new ServeOptionError(`${source} must be a whole number, got "${String(value)}"`);
    return Number(value);
  }
  return value;
}

/** Runs `sparsewire serve`; resolves with the exit code once the daemon has stopped. */
export async function serveCommand(argv: string[]): Promise<number> {
  let options: ServeOptions | 'help';
  try {
    options = serveOptions(argv);
  } catch (err) {
    process.stderr.write(`sparsewire serve: ${(err as Error).message}\n(see sparsewire serve --help)\n`);
    return 2;
  }
  if (options === 'help') {
    process.stdout.write(serveHelp());
    return 0;
  }
  let daemon: RunningDaemon;
  try {
    const { cluster, ...config } = options;
    daemon = cluster === undefined ? await startDaemon(config) : await startClusterNode(config, cluster);
  } catch (err) {
    process.stderr.write(`sparsewire serve: could not start: ${(err as Error).message}\n`);
    return 1;
  }
  process.stdout.write(`sparsewire listening on ${daemon.url}\n`);
  await new Promise<void>((resolve) => {
    const stop = (signal: NodeJS.Signals) => {
      process.off('SIGINT', stop);
      process.off('SIGTERM', stop);
      daemon.close(`daemon stopping (${signal})`).then(resolve, resolve);
    };
    process.on('SIGINT', stop);
    process.on('SIGTERM', stop);
  });
  return 0;
}
