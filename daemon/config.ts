import { existsSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import type { Logger } from 'pino';
import { MAX_MESSAGE_BYTES } from '../protocol/index.js';
import { ROLES, type TokenGrant } from './access.js';

/** Resource limits (documented in docs/daemon.md, "Configuration"). */
export interface DaemonLimits {
  /** Largest WebSocket message accepted (ws maxPayload); larger ones close the connection (1009). */
  maxMessageBytes: number;
  /** Streams one producer connection may declare. */
  maxStreamsPerConnection: number;
  /** Open WebSocket connections per access token (only enforced when tokens are configured). */
  maxConnectionsPerToken: number;
  /** Subscriptions one subscriber connection may hold. */
  maxSubscriptionsPerConnection: number;
  /** A subscriber whose unsent bytes exceed this is behind: its `when_behind` policy applies. */
  outboxHighBytes: number;
  /** ...and catches up once they fall below this. */
  outboxLowBytes: number;
  /** Unsent bytes beyond this terminate the subscriber's connection. */
  outboxHardCapBytes: number;
  /** Alerts and stream events held for a subscriber that is behind (drop ranges are merged, not counted). */
  outboxMaxNotices: number;
  /**
   * Measurement bytes all stream queues together may hold; above it the daemon stops reading
   * from producer sockets (TCP pushes back) until half of it has drained.
   */
  maxQueuedBytes: number;
  /**
   * The slowest a live peer may read: a ping's answer may take as long as reading what was sent
   * before it takes at this rate (plus half a heartbeat) before the peer counts as dead.
   */
  minReadBytesPerSecond: number;
}

export interface DaemonConfig {
  host: string;
  /** 0 = an ephemeral port. */
  port: number;
  /** Solver worker threads. */
  workers: number;
  /** Where declarations persist (`streams.json`); null = no persistence. */
  stateDir: string | null;
  /** Access tokens; empty = open access. */
  tokens: TokenGrant[];
  /** Certificate and key files (PEM) for HTTPS/WSS. */
  tls?: { cert: string; key: string };
  /** Dashboard files served under `/`; null = none. */
  staticDir: string | null;
  limits: DaemonLimits;
  /** Ping interval; a peer whose answer is overdue is terminated (see limits.minReadBytesPerSecond). */
  heartbeatMs: number;
  /** Longest wait for accepted frames during a graceful shutdown. */
  shutdownGraceMs: number;
  /** Results kept per stream for subscribers that resume after a reconnect. */
  retainedResults: number;
  /** pino level: fatal, error, warn, info, debug, trace or silent. */
  logLevel: string;
  /** A ready-made logger (tests, embedding); overrides logLevel. */
  logger?: Logger;
}

export const DEFAULT_LIMITS: DaemonLimits = {
  maxMessageBytes: MAX_MESSAGE_BYTES,
  maxStreamsPerConnection: 64,
  maxConnectionsPerToken: 64,
  maxSubscriptionsPerConnection: 16,
  outboxHighBytes: 1024 * 1024,
  outboxLowBytes: 256 * 1024,
  outboxHardCapBytes: 16 * 1024 * 1024,
  outboxMaxNotices: 1000,
  maxQueuedBytes: 256 * 1024 * 1024,
  minReadBytesPerSecond: 32 * 1024,
};

export function defaultStaticDir(): string | null {
  // From this file's location, not the working directory: `sparsewire demo` run from any folder
  // (or through a global install) must still serve the dashboard.
  const dir = path.resolve(fileURLToPath(new URL('../clients/web', import.meta.url)));
  return existsSync(dir) ? dir : null;
}

/** Fills defaults and checks the combination; throws an Error naming the bad setting. */
export function resolveConfig(partial: Partial<DaemonConfig>): DaemonConfig {
  const limits: DaemonLimits = { ...DEFAULT_LIMITS, ...(partial.limits ?? {}) };
  const config: DaemonConfig = {
    host: partial.host ?? '127.0.0.1',
    port: partial.port ?? 0,
    workers: partial.workers ?? os.availableParallelism(),
    stateDir: partial.stateDir === undefined ? path.resolve('.sparsewire-state') : partial.stateDir,
    tokens: partial.tokens ?? [],
    ...(partial.tls ? { tls: partial.tls } : {}),
    staticDir: partial.staticDir === undefined ? defaultStaticDir() : partial.staticDir,
    limits,
    heartbeatMs: partial.heartbeatMs ?? 15_000,
    shutdownGraceMs: partial.shutdownGraceMs ?? 10_000,
    retainedResults: partial.retainedResults ?? 32,
    logLevel: partial.logLevel ?? 'info',
    ...(partial.logger ? { logger: partial.logger } : {}),
  };
  checkConfig(config);
  return config;
}

function checkConfig(c: DaemonConfig): void {
  const int = (v: number, min: number, name: string, max = Number.MAX_SAFE_INTEGER) => {
    if (!Number.isInteger(v) || v < min || v > max) throw new Error(`${name} must be an integer in [${min}, ${max}], got ${v}`);
  };
  int(c.port, 0, 'port', 65535);
  int(c.workers, 1, 'workers', 256);
  int(c.heartbeatMs, 10, 'heartbeatMs');
  int(c.shutdownGraceMs, 0, 'shutdownGraceMs');
  int(c.retainedResults, 0, 'retainedResults', 10_000);
  const l = c.limits;
  int(l.maxMessageBytes, 1024, 'limits.maxMessageBytes', MAX_MESSAGE_BYTES);
  int(l.maxStreamsPerConnection, 1, 'limits.maxStreamsPerConnection');
  int(l.maxConnectionsPerToken, 1, 'limits.maxConnectionsPerToken');
  int(l.maxSubscriptionsPerConnection, 1, 'limits.maxSubscriptionsPerConnection');
  int(l.outboxLowBytes, 0, 'limits.outboxLowBytes');
  int(l.outboxHighBytes, 1, 'limits.outboxHighBytes');
  int(l.outboxHardCapBytes, 1, 'limits.outboxHardCapBytes');
  int(l.outboxMaxNotices, 1, 'limits.outboxMaxNotices');
  int(l.maxQueuedBytes, 1, 'limits.maxQueuedBytes');
  int(l.minReadBytesPerSecond, 1, 'limits.minReadBytesPerSecond');
  if (!(l.outboxLowBytes < l.outboxHighBytes && l.outboxHighBytes < l.outboxHardCapBytes)) {
    throw new Error('limits: outboxLowBytes < outboxHighBytes < outboxHardCapBytes is required');
  }
  const levels = ['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent'];
  if (!levels.includes(c.logLevel)) throw new Error(`logLevel must be one of ${levels.join(', ')}, got "${c.logLevel}"`);
  if (c.tls && !(c.tls.cert && c.tls.key)) throw new Error('tls needs both cert and key file paths');
  c.tokens.forEach((t, i) => {
    if (typeof t.token !== 'string' || t.token.length === 0) throw new Error(`tokens[${i}].token must be a non-empty string`);
    if (!Array.isArray(t.roles) || t.roles.length === 0 || t.roles.some((r) => !ROLES.includes(r))) {
      throw new Error(`tokens[${i}].roles must list some of ${ROLES.join(', ')}`);
    }
    if (t.streams !== undefined && (!Array.isArray(t.streams) || t.streams.some((s) => typeof s !== 'string' || s === ''))) {
      throw new Error(`tokens[${i}].streams must be a list of stream-name patterns`);
    }
  });
}
