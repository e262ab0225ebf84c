import { type DaemonConfig, resolveConfig } from './config.js';
import type { DaemonCore } from './core.js';
import type { OutboxStats } from './outbox.js';
import { type CoreFactory, DaemonServer } from './server.js';

export type { DaemonConfig, DaemonLimits } from './config.js';
export { DEFAULT_LIMITS, resolveConfig } from './config.js';
export type { TokenGrant, Role } from './access.js';
export type { CoreFactory } from './server.js';

/** A daemon started by startDaemon. */
export interface RunningDaemon {
  /** e.g. http://127.0.0.1:PORT (https with TLS); WebSocket endpoints at ws(s)://…/v1/produce and /v1/watch. */
  readonly url: string;
  readonly port: number;
  /** The resolved configuration. */
  readonly config: DaemonConfig;
  /** Streams restored from the state directory at startup. */
  readonly restoredStreams: number;
  /** Graceful shutdown: stop accepting, finish accepted frames, flush, close connections with `reason`. */
  close(reason?: string): Promise<void>;
  /** The metrics in Prometheus text format (what GET /v1/metrics serves). */
  metricsText(): string;
  /** The stream registry as GET /v1/streams lists it. */
  streams(): object[];
  /** Each connected subscriber's outbox (how far behind it is, what it holds). */
  subscriberOutboxes(): OutboxStats[];
  /** Internals for tests and embedding: pipeline, worker pool, metrics. */
  readonly core: DaemonCore;
}

/** Starts a daemon and resolves once it listens; `makeCore` swaps in another core (cluster mode). */
export async function startDaemon(partial: Partial<DaemonConfig> = {}, makeCore?: CoreFactory): Promise<RunningDaemon> {
  const config = resolveConfig(partial);
  const server = new DaemonServer(config, makeCore);
  let restoredStreams: number;
  try {
    restoredStreams = await server.core.restore();
    await server.listen();
  } catch (err) {
    await server.core.destroy();
    throw err;
  }
  server.log.info({ url: server.url, workers: config.workers, stateDir: config.stateDir, access: server.core.access.open ? 'open' : 'tokens' }, 'listening');
  return {
    url: server.url,
    port: server.port,
    config,
    restoredStreams,
    close: (reason) => server.close(reason),
    metricsText: () => server.core.metrics.render(),
    streams: () => server.core.describeStreams(),
    subscriberOutboxes: () => server.outboxStats(),
    core: server.core,
  };
}
