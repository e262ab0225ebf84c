import { deserialize, serialize } from 'node:v8';
import { encodeTrusted, type MissedMessage } from '../protocol/index.js';
import type { AlertEvent, MissedRange, PublishedResult, StreamDeclaration } from '../pipeline/types.js';
import type { DaemonMetrics } from './daemonMetrics.js';
import { resultMessage, viewKey } from './resultViews.js';
import type { SubscriberSession } from './subscriberSession.js';

/**
 * Delivers results, alerts, drop notices and stream events to subscribers. Each result is
 * encoded at most once per distinct view, lazily (a subscriber that is behind may never need
 * it). A short history of results per stream is retained for subscribers that resume after a
 * reconnect.
 */
export class FanOut {
  private readonly members = new Set<SubscriberSession>();
  /** Per stream, the subscribers that receive its results: worked out once, forgotten when any subscription changes. */
  private readonly audiences = new Map<string, SubscriberSession[]>();
  private readonly retained = new Map<string, RetainedResult[]>();

  constructor(
    private readonly metrics: DaemonMetrics,
    private readonly retainCount: number,
  ) {}

  get subscribers(): ReadonlySet<SubscriberSession> {
    return this.members;
  }

  add(sub: SubscriberSession): void {
    this.members.add(sub);
    this.subscriptionsChanged();
  }

  remove(sub: SubscriberSession): void {
    this.members.delete(sub);
    this.subscriptionsChanged();
  }

  /** A subscriber subscribed or unsubscribed: who receives what must be worked out again. */
  subscriptionsChanged(): void {
    this.audiences.clear();
  }

  /** Whether some subscriber wants the reconstructed signal of `stream` (it is computed only then). */
  wantsSignal(stream: string): boolean {
    return this.audienceOf(stream).some((s) => s.viewFor(stream)?.signal === true);
  }

  publishResult(result: PublishedResult): void {
    const encoded = new Map<string, Uint8Array>();
    for (const sub of this.audienceOf(result.stream)) this.offer(sub, result, encoded);
    // Kept after it is on its way: retention is bookkeeping, delivery is what someone waits for.
    this.retain(result);
  }

  private audienceOf(stream: string): SubscriberSession[] {
    let audience = this.audiences.get(stream);
    if (audience === undefined) {
      audience = [...this.members].filter((s) => s.viewFor(stream) !== null);
      this.audiences.set(stream, audience);
    }
    return audience;
  }

  /** One result to one subscriber (replay after a resume). */
  deliverTo(sub: SubscriberSession, result: PublishedResult): void {
    this.offer(sub, result, new Map());
  }

  private offer(sub: SubscriberSession, result: PublishedResult, encoded: Map<string, Uint8Array>): void {
    const view = sub.viewFor(result.stream);
    if (view === null) return;
    const key = viewKey(view);
    const bytes = () => {
      let b = encoded.get(key);
      if (b === undefined) {
        b = encodeTrusted(resultMessage(result, view));
        encoded.set(key, b);
      }
      return b;
    };
    if (sub.outbox.sendResult(result.stream, result.seq, bytes)) this.metrics.resultsDelivered.inc();
  }

  publishAlert(a: AlertEvent): void {
    let bytes: Uint8Array | undefined;
    for (const sub of this.members) {
      if (!sub.wantsAlerts(a.stream)) continue;
      bytes ??= encodeTrusted({ v: 1, type: 'alert', stream: a.stream, seq: a.seq, rule: a.ruleIndex, metric: a.rule.metric, state: a.state, value: a.value, limit: a.limit });
      sub.outbox.sendNotice(bytes);
    }
  }

  /** `reason` is a DropReason, or in cluster mode the reason a stream's owner refused a stored frame. */
  publishMissed(m: Omit<MissedRange, 'reason'> & { reason: string }): void {
    const span = { stream: m.stream, fromSeq: m.fromSeq, toSeq: m.toSeq, count: m.count, reason: m.reason };
    let bytes: Uint8Array | undefined;
    const encoded = () => (bytes ??= encodeTrusted(missedMessage(m.stream, m.fromSeq, m.toSeq, m.count, m.reason)));
    for (const sub of this.members) {
      if (sub.viewFor(m.stream) !== null) sub.outbox.sendMissed(span, encoded);
    }
  }

  publishStreamEvent(stream: string, event: 'declared' | 'closed', declaration?: StreamDeclaration): void {
    let bytes: Uint8Array | undefined;
    for (const sub of this.members) {
      if (!sub.follows(stream)) continue;
      bytes ??= encodeTrusted({ v: 1, type: 'stream_event', stream, event, ...(declaration ? { declaration } : {}) });
      sub.outbox.sendNotice(bytes);
    }
    if (event === 'closed') {
      this.retained.delete(stream);
      this.audiences.delete(stream);
    }
  }

  /** Retained results of `stream` with seq above `afterSeq`, oldest first. */
  retainedAfter(stream: string, afterSeq: number): PublishedResult[] {
    return (this.retained.get(stream) ?? []).filter((r) => r.seq > afterSeq).map((r) => deserialize(r.packed) as PublishedResult);
  }

  private retain(result: PublishedResult): void {
    if (this.retainCount === 0) return;
    let ring = this.retained.get(result.stream);
    if (ring === undefined) this.retained.set(result.stream, (ring = []));
    ring.push({ seq: result.seq, packed: serialize(result) });
    if (ring.length > this.retainCount) ring.shift();
  }
}

/**
 * A result kept for resuming subscribers, serialised: one buffer instead of a dozen objects and
 * arrays. Thousands of streams each keep dozens of results, and as live objects they were most of
 * what the collector had to copy and mark (pauses of tens of milliseconds under load).
 */
interface RetainedResult {
  seq: number;
  packed: Buffer;
}

export function missedMessage(stream: string, fromSeq: number, toSeq: number, count: number, reason: string): MissedMessage {
  return { v: 1, type: 'missed', stream, from_seq: fromSeq, to_seq: toSeq, count, reason };
}
