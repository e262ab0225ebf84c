import os from 'node:os';
import { randomBytes } from 'node:crypto';
import { type DaemonConfig, type RunningDaemon, startDaemon } from '../daemon/index.js';
import { ClusterCore } from './clusterCore.js';
import { DEFAULT_PARTITIONS } from './names.js';
import { type ClusterSettings, DEFAULT_LEASE_TTL_MS, DEFAULT_RENEW_MS } from './natsResources.js';

export { ClusterCore } from './clusterCore.js';
export { DEFAULT_PARTITIONS, clusterNames, frameSubject, frameMessageId, nameToken, outSubject, partitionOf, fnv1a32 } from './names.js';
export type { ClusterSettings } from './natsResources.js';

export const DEFAULT_PREFIX = 'sparsewire';

/** Fills defaults and checks the combination; throws an Error naming the bad setting. */
export function resolveClusterSettings(partial: Partial<ClusterSettings> & { servers: string[] }): ClusterSettings {
  const s: ClusterSettings = {
    servers: partial.servers,
    prefix: partial.prefix ?? DEFAULT_PREFIX,
    partitions: partial.partitions ?? DEFAULT_PARTITIONS,
    nodeId: partial.nodeId ?? `${os.hostname()}-${process.pid}-${randomBytes(3).toString('hex')}`,
    renewMs: partial.renewMs ?? DEFAULT_RENEW_MS,
    leaseTtlMs: partial.leaseTtlMs ?? DEFAULT_LEASE_TTL_MS,
    frameLogMaxBytes: partial.frameLogMaxBytes ?? 1024 ** 3,
    maxAckPending: partial.maxAckPending ?? 256,
  };
  if (s.servers.length === 0 || s.servers.some((u) => !/^(nats|tls):\/\/[^\s]+$/.test(u))) {
    throw new Error(`cluster: servers must be nats:// or tls:// URLs, got ${JSON.stringify(s.servers)}`);
  }
  if (!/^[A-Za-z0-9_-]{1,64}$/.test(s.nodeId)) throw new Error(`cluster: nodeId must be 1-64 letters, digits, '_' or '-', got "${s.nodeId}"`);
  if (!Number.isInteger(s.renewMs) || s.renewMs < 100) throw new Error(`cluster: renewMs must be an integer ≥ 100, got ${s.renewMs}`);
  if (!Number.isInteger(s.leaseTtlMs) || s.leaseTtlMs < 2 * s.renewMs) {
    throw new Error(`cluster: leaseTtlMs must be at least twice renewMs (${2 * s.renewMs}), got ${s.leaseTtlMs}`);
  }
  if (!Number.isInteger(s.maxAckPending) || s.maxAckPending < 1) throw new Error(`cluster: maxAckPending must be a positive integer, got ${s.maxAckPending}`);
  if (!Number.isInteger(s.frameLogMaxBytes) || s.frameLogMaxBytes < 1024 * 1024) throw new Error(`cluster: frameLogMaxBytes must be at least 1 MiB, got ${s.frameLogMaxBytes}`);
  return s;
}

/**
 * Starts a daemon as a node of a cluster on NATS JetStream: same endpoints and protocol as
 * `startDaemon`, declarations in the cluster's KV bucket instead of a state directory.
 */
export function startClusterNode(config: Partial<DaemonConfig>, cluster: Partial<ClusterSettings> & { servers: string[] }): Promise<RunningDaemon> {
  const settings = resolveClusterSettings(cluster);
  return startDaemon({ ...config, stateDir: null }, (c, log) => new ClusterCore(c, log.child({ node: settings.nodeId }), settings));
}
