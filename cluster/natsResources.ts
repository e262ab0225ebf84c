import { AckPolicy, DeliverPolicy, DiscardPolicy, RetentionPolicy, StorageType, jetstream, jetstreamManager, type JetStreamClient, type JetStreamManager } from '@nats-io/jetstream';
import { Kvm, type KV } from '@nats-io/kv';
import { connect, nanos, type NatsConnection } from '@nats-io/transport-node';
import { type ClusterNames, consumerName, partitionFilter } from './names.js';

/** How a node talks to NATS; timings documented in docs/cluster.md ("Failover"). */
export interface ClusterSettings {
  /** NATS server URL(s), e.g. nats://127.0.0.1:4222. */
  servers: string[];
  /** Name prefix of every subject, stream and bucket (default `sparsewire`). */
  prefix: string;
  partitions: number;
  /** This node's id (unique among live nodes). */
  nodeId: string;
  /** How often leases and the node heartbeat are renewed. */
  renewMs: number;
  /** Bucket TTL of leases and heartbeats: a dead node's partitions are free after this. */
  leaseTtlMs: number;
  /** Most bytes the frame log may hold; past it new frames are refused (queue_full). */
  frameLogMaxBytes: number;
  /** Frames a partition's consumer may hand out unacknowledged (bounds a node's intake). */
  maxAckPending: number;
}

export const DEFAULT_RENEW_MS = 1000;
/** Generous against event-loop stalls of a saturated node; a dead node's partitions move after about this long. */
export const DEFAULT_LEASE_TTL_MS = 5000;

export interface NatsHandles {
  nc: NatsConnection;
  js: JetStreamClient;
  jsm: JetStreamManager;
  declarations: KV;
  leases: KV;
  nodes: KV;
}

/** How long JetStream remembers message ids to store a resent frame once. */
const DUPLICATE_WINDOW_MS = 120_000;

/** Connects and makes sure the frame log and the buckets exist (idempotent; every node does it). */
export async function openNats(n: ClusterNames, s: ClusterSettings): Promise<NatsHandles> {
  const nc = await connect({ servers: s.servers, name: `sparsewire-${s.nodeId}`, maxReconnectAttempts: -1 });
  try {
    const jsm = await jetstreamManager(nc);
    const config = {
      name: n.frameLog,
      subjects: [`${n.prefix}.frames.>`],
      retention: RetentionPolicy.Workqueue,
      storage: StorageType.File,
      discard: DiscardPolicy.New,
      max_bytes: s.frameLogMaxBytes,
      duplicate_window: nanos(DUPLICATE_WINDOW_MS),
    };
    try {
      await jsm.streams.info(n.frameLog);
      await jsm.streams.update(n.frameLog, { max_bytes: config.max_bytes, duplicate_window: config.duplicate_window });
    } catch {
      await jsm.streams.add(config).catch(async (err: Error) => {
        // Another node created it between our look and our add.
        if (!(await jsm.streams.info(n.frameLog).then(() => true, () => false))) throw err;
      });
    }
    const js = jetstream(nc);
    const kvm = new Kvm(js);
    const ttl = s.leaseTtlMs;
    const [declarations, leases, nodes] = await Promise.all([
      kvm.create(n.declarationsBucket, { history: 1, storage: StorageType.File }),
      kvm.create(n.leasesBucket, { history: 1, ttl, storage: StorageType.Memory }),
      kvm.create(n.nodesBucket, { history: 1, ttl, storage: StorageType.Memory }),
    ]);
    return { nc, js, jsm, declarations, leases, nodes };
  } catch (err) {
    await nc.close();
    throw err;
  }
}

/**
 * Replaces a partition's durable consumer with a fresh one that delivers everything the log
 * still holds for it. The log keeps a frame until it is acknowledged (work-queue retention), so
 * this is exactly the frames not finished yet — including those handed to a dead owner, which
 * the old consumer would only redeliver after its ack wait.
 */
export async function freshPartitionConsumer(h: NatsHandles, n: ClusterNames, partition: number, maxAckPending: number): Promise<void> {
  const durable = consumerName(partition);
  await h.jsm.consumers.delete(n.frameLog, durable).catch(() => undefined);
  await h.jsm.consumers.add(n.frameLog, {
    durable_name: durable,
    filter_subject: partitionFilter(n, partition),
    ack_policy: AckPolicy.Explicit,
    deliver_policy: DeliverPolicy.All,
    max_ack_pending: maxAckPending,
    // Frames wait in the owner's bounded queues; only a stalled owner should see redeliveries.
    ack_wait: nanos(60_000),
    max_deliver: -1,
  });
}
