import { encode, type MissedMessage } from '../protocol/index.js';
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
  readonly subscribers = new Set<SubscriberSession>();
  private readonly retained = new Map<string, PublishedResult[]>();

  constructor(
    private readonly metrics: DaemonMetrics,
    private readonly retainCount: number,
  ) {}

  publishResult(result: PublishedResult): void {
    this.retain(result);
    const encoded = new Map<string, Uint8Array>();
    for (const sub of this.subscribers) this.offer(sub, result, encoded);
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
        b = encode(resultMessage(result, view));
        encoded.set(key, b);
      }
      return b;
    };
    if (sub.outbox.sendResult(result.stream, result.seq, bytes)) this.metrics.resultsDelivered.inc();
  }

  publishAlert(a: AlertEvent): void {
    let bytes: Uint8Array | undefined;
    for (const sub of this.subscribers) {
      if (!sub.wantsAlerts(a.stream)) continue;
      bytes ??= encode({ v: 1, type: 'alert', stream: a.stream, seq: a.seq, rule: a.ruleIndex, metric: a.rule.metric, state: a.state, value: a.value, limit: a.limit });
      sub.outbox.sendNotice(bytes);
    }
  }

  /** `reason` is a DropReason, or in cluster mode the reason a stream's owner refused a stored frame. */
  publishMissed(m: Omit<MissedRange, 'reason'> & { reason: string }): void {
    let bytes: Uint8Array | undefined;
    for (const sub of this.subscribers) {
      if (sub.viewFor(m.stream) === null) continue;
      bytes ??= encode(missedMessage(m.stream, m.fromSeq, m.toSeq, m.count, m.reason));
      sub.outbox.sendNotice(bytes);
    }
  }

  publishStreamEvent(stream: string, event: 'declared' | 'closed', declaration?: StreamDeclaration): void {
    let bytes: Uint8Array | undefined;
    for (const sub of this.subscribers) {
      if (!sub.follows(stream)) continue;
      bytes ??= encode({ v: 1, type: 'stream_event', stream, event, ...(declaration ? { declaration } : {}) });
      sub.outbox.sendNotice(bytes);
    }
    if (event === 'closed') this.retained.delete(stream);
  }

  /** Retained results of `stream` with seq above `afterSeq`, oldest first. */
  retainedAfter(stream: string, afterSeq: number): PublishedResult[] {
    return (this.retained.get(stream) ?? []).filter((r) => r.seq > afterSeq);
  }

  private retain(result: PublishedResult): void {
    if (this.retainCount === 0) return;
    let ring = this.retained.get(result.stream);
    if (ring === undefined) this.retained.set(result.stream, (ring = []));
    ring.push(result);
    if (ring.length > this.retainCount) ring.shift();
  }
}

export function missedMessage(stream: string, fromSeq: number, toSeq: number, count: number, reason: string): MissedMessage {
  return { v: 1, type: 'missed', stream, from_seq: fromSeq, to_seq: toSeq, count, reason };
}
