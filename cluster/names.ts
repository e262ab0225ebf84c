/**
 * Where things live in NATS for one cluster (all names derive from a prefix, default
 * `sparsewire`, so several clusters can share one NATS server). Specified in docs/cluster.md;
 * a producer publishing straight to NATS computes the same partition and subject.
 */

/** Partitions of the frame log; fixed for the life of a cluster (changing it remaps streams). */
export const DEFAULT_PARTITIONS = 32;

export interface ClusterNames {
  prefix: string;
  partitions: number;
  /** JetStream stream holding frames (work-queue retention). */
  frameLog: string;
  /** KV bucket: stream name token → declaration record. */
  declarationsBucket: string;
  /** KV bucket: `p<N>` → owning node id (the lease; bucket TTL expires it). */
  leasesBucket: string;
  /** KV bucket: node id → heartbeat (same TTL): how many nodes are alive. */
  nodesBucket: string;
}

const PREFIX_RE = /^[A-Za-z0-9_-]+$/;

export function clusterNames(prefix: string, partitions: number): ClusterNames {
  if (!PREFIX_RE.test(prefix)) throw new Error(`cluster prefix must contain only letters, digits, '_' and '-', got "${prefix}"`);
  if (!Number.isInteger(partitions) || partitions < 1 || partitions > 4096) throw new Error(`partitions must be an integer in [1, 4096], got ${partitions}`);
  const upper = prefix.toUpperCase().replaceAll('-', '_');
  return {
    prefix,
    partitions,
    frameLog: `${upper}_FRAMES`,
    declarationsBucket: `${prefix}-streams`,
    leasesBucket: `${prefix}-leases`,
    nodesBucket: `${prefix}-nodes`,
  };
}

/**
 * A stream name as one NATS subject token and KV key: '.' becomes '=' (stream names never hold
 * '=', so the mapping is reversible; NATS would read '.' as a token separator).
 */
export function nameToken(stream: string): string {
  return stream.replaceAll('.', '=');
}

export function streamOfToken(token: string): string {
  return token.replaceAll('=', '.');
}

/**
 * The partition of a stream: 32-bit FNV-1a over the name's UTF-8 bytes, modulo the partition
 * count. FNV-1a is a published, language-neutral hash (offset basis 2166136261, prime 16777619).
 */
export function partitionOf(stream: string, partitions: number): number {
  return fnv1a32(new TextEncoder().encode(stream)) % partitions;
}

export function fnv1a32(bytes: Uint8Array): number {
  let h = 0x811c9dc5;
  for (const b of bytes) {
    h ^= b;
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h >>> 0;
}

/** Subject a frame of `stream` is published on. */
export function frameSubject(n: ClusterNames, stream: string): string {
  return `${n.prefix}.frames.${partitionOf(stream, n.partitions)}.${nameToken(stream)}`;
}

/** Every frame subject of one partition (a consumer's filter). */
export function partitionFilter(n: ClusterNames, partition: number): string {
  return `${n.prefix}.frames.${partition}.*`;
}

/** Subject the owner publishes a stream's results, alerts and notices on. */
export function outSubject(n: ClusterNames, stream: string): string {
  return `${n.prefix}.out.${nameToken(stream)}`;
}

export function outWildcard(n: ClusterNames): string {
  return `${n.prefix}.out.*`;
}

export function leaseKey(partition: number): string {
  return `p${partition}`;
}

/** Durable consumer name of a partition. */
export function consumerName(partition: number): string {
  return `frames-p${partition}`;
}

/** Message id for JetStream's duplicate window: a frame resent after a lost answer is stored once. */
export function frameMessageId(stream: string, seq: number): string {
  return `${stream}:${seq}`;
}
