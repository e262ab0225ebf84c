import type { Logger } from 'pino';
import type { NatsHandles, ClusterSettings } from './natsResources.js';
import { fnv1a32, leaseKey } from './names.js';

export interface LeaseHandlers {
  /** This node now owns `partition`: start taking its frames. */
  acquired(partition: number): Promise<void>;
  /** Hand `partition` over: stop taking its frames and finish those taken (bounded). */
  release(partition: number): Promise<void>;
  /** The lease was lost (renewal failed: another node holds it now): stop at once. */
  lost(partition: number): void;
}

/**
 * Partition ownership by KV leases. A lease is a key `p<N>` in a bucket whose TTL expires it:
 * `create` succeeds only when the key is absent (acquire), `update` with the last revision
 * renews it (compare-and-swap), delete hands it over. Every node also renews a heartbeat key in
 * a bucket with the same TTL; the live count sets each node's fair share, ceil(P / nodes). A
 * node below its share takes free partitions; above it, it hands extras over gracefully.
 */
export class PartitionLeases {
  /** Owned partitions → revision of our lease. */
  private readonly owned = new Map<number, number>();
  private readonly releasing = new Set<number>();
  private readonly timers: NodeJS.Timeout[] = [];
  private renewing: Promise<void> | undefined;
  private balancing: Promise<void> | undefined;
  private stopped = false;

  constructor(
    private readonly h: NatsHandles,
    private readonly s: ClusterSettings,
    private readonly handlers: LeaseHandlers,
    private readonly log: Logger,
  ) {}

  /** Partitions this node owns now. */
  partitions(): number[] {
    return [...this.owned.keys()].sort((a, b) => a - b);
  }

  /** Announces the node, waits one renew period (so nodes started together see each other), then balances. */
  async start(): Promise<void> {
    await this.heartbeat();
    await new Promise((resolve) => setTimeout(resolve, this.s.renewMs));
    await this.balanceRound();
    // Renewal runs on its own clock: a slow balancing round (taking many partitions on a busy
    // machine) must never let the leases already held expire.
    this.timers.push(setInterval(() => void this.renewRound(), this.s.renewMs));
    this.timers.push(setInterval(() => void this.balanceRound(), this.s.renewMs));
  }

  /** Hands every partition over and withdraws the node. */
  async stop(): Promise<void> {
    this.stopped = true;
    for (const t of this.timers) clearInterval(t);
    await this.balancing;
    // Keep renewing while the partitions finish their frames.
    const keepRenewing = setInterval(() => void this.renewRound(), this.s.renewMs);
    try {
      await Promise.all([...this.owned.keys()].filter((p) => !this.releasing.has(p)).map((p) => this.handOver(p)));
    } finally {
      clearInterval(keepRenewing);
    }
    await this.renewing;
    await this.h.nodes.delete(this.s.nodeId).catch(() => undefined);
  }

  private renewRound(): Promise<void> {
    this.renewing ??= Promise.all([this.heartbeat(), this.renew()])
      .then(() => undefined)
      .catch((err: Error) => this.log.warn({ err: err.message }, 'lease renewal failed; retrying next round'))
      .finally(() => (this.renewing = undefined));
    return this.renewing;
  }

  private balanceRound(): Promise<void> {
    if (this.stopped) return Promise.resolve();
    this.balancing ??= this.balance()
      .catch((err: Error) => this.log.warn({ err: err.message }, 'balancing round failed; retrying next round'))
      .finally(() => (this.balancing = undefined));
    return this.balancing;
  }

  private heartbeat(): Promise<number> {
    return this.h.nodes.put(this.s.nodeId, JSON.stringify({ at: Date.now() }));
  }

  private async balance(): Promise<void> {
    // One message per live node (history 1; the TTL removes dead ones). A key listing would
    // walk a bucket whose entries expire meanwhile, and can wait for an entry that is gone.
    const live = (await this.h.nodes.status()).values;
    const share = Math.ceil(this.s.partitions / Math.max(1, live));
    const kept = this.owned.size - this.releasing.size;
    if (kept > share) {
      // Hand over the highest-numbered extras; not awaited, renewal goes on meanwhile.
      const extras = this.partitions().filter((p) => !this.releasing.has(p)).slice(share - kept);
      for (const p of extras) void this.handOver(p);
    } else if (kept < share && !this.stopped) {
      await this.acquireUpTo(share - kept);
    }
  }

  private async renew(): Promise<void> {
    for (const [p, revision] of this.owned) {
      try {
        this.owned.set(p, await this.h.leases.update(leaseKey(p), this.s.nodeId, revision));
      } catch (err) {
        if (!this.owned.has(p) || this.releasing.has(p)) continue; // being handed over
        // Only a revision mismatch means someone else holds it; a slow answer is retried next round.
        if (!/wrong last sequence/i.test((err as Error).message)) {
          this.log.warn({ partition: p, err: (err as Error).message }, 'lease renewal not answered; retrying next round');
          continue;
        }
        this.owned.delete(p);
        this.log.warn({ partition: p, err: (err as Error).message }, 'partition lease lost');
        this.handlers.lost(p);
      }
    }
  }

  private async acquireUpTo(wanted: number): Promise<void> {
    // Each node starts its search at its own place so nodes rarely race for the same key.
    const start = fnv1a32(new TextEncoder().encode(this.s.nodeId)) % this.s.partitions;
    for (let i = 0; i < this.s.partitions && wanted > 0 && !this.stopped; i++) {
      const p = (start + i) % this.s.partitions;
      if (this.owned.has(p)) continue;
      let revision: number;
      try {
        revision = await this.h.leases.create(leaseKey(p), this.s.nodeId);
      } catch {
        continue; // another node was faster
      }
      this.owned.set(p, revision);
      wanted--;
      try {
        await this.handlers.acquired(p);
        this.log.info({ partition: p }, 'partition acquired');
      } catch (err) {
        this.log.error({ partition: p, err: (err as Error).message }, 'could not start a partition; handing it back');
        await this.handOver(p);
      }
    }
  }

  private async handOver(p: number): Promise<void> {
    this.releasing.add(p);
    try {
      await this.handlers.release(p);
    } finally {
      const revision = this.owned.get(p);
      this.owned.delete(p);
      this.releasing.delete(p);
      // Only our own lease: if it was lost meanwhile, the new owner's key stays.
      if (revision !== undefined) await this.h.leases.delete(leaseKey(p), { previousSeq: revision }).catch(() => undefined);
      this.log.info({ partition: p }, 'partition handed over');
    }
  }
}
