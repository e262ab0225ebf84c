import { encodeTrusted, matchesStreamPattern, type Message, type SubscribeMessage, type UnsubscribeMessage, type Want } from '../protocol/index.js';
import { mayAct } from './access.js';
import { Connection, RequestError } from './connection.js';
import { missedMessage } from './fanout.js';
import { Outbox, type OutboxSocket } from './outbox.js';
import type { ResultView } from './resultViews.js';

interface Subscription {
  id: string;
  patterns: string[];
  want: ReadonlySet<Want>;
  topK: number;
}

const DEFAULT_TOP_K = 8;

/**
 * One subscriber connection (`/v1/watch`). It may hold several subscriptions; for each stream the
 * connection receives the union of what its matching subscriptions want. Everything it is sent
 * goes through its bounded outbox, whose `when_behind` policy is the one of the most recent
 * subscription (one outbox per connection).
 */
export class SubscriberSession extends Connection {
  outbox!: Outbox;
  private readonly subs = new Map<string, Subscription>();
  private readonly views = new Map<string, ResultView | null>();
  private nextId = 1;

  init(): this {
    const l = this.core.config.limits;
    const ws = this.ws;
    const socket: OutboxSocket = {
      get bufferedAmount() {
        return ws.bufferedAmount;
      },
      send: (data, cb) => this.sendBytes(data, cb),
      close: (code, reason) => ws.close(code, reason),
      terminate: () => ws.terminate(),
    };
    this.outbox = new Outbox(
      socket,
      { highBytes: l.outboxHighBytes, lowBytes: l.outboxLowBytes, hardCapBytes: l.outboxHardCapBytes, maxNotices: l.outboxMaxNotices },
      {
        encodeMissed: (m) => encodeTrusted(missedMessage(m.stream, m.fromSeq, m.toSeq, m.count, m.reason)),
        skipped: (count, policy) => this.core.metrics.resultsMissed.inc({ policy }, count),
        disconnected: (reason) => {
          this.core.metrics.connectionsClosed.inc({ endpoint: 'watch', reason });
          this.log.info({ reason }, 'subscriber disconnected by its outbox');
        },
      },
    );
    return this;
  }

  protected deliver(bytes: Uint8Array): void {
    this.outbox.sendNotice(bytes);
  }

  protected handle(msg: Message): void {
    switch (msg.type) {
      case 'subscribe':
        return this.subscribe(msg);
      case 'unsubscribe':
        return this.unsubscribe(msg);
      default:
        throw new RequestError('wrong_endpoint', `"${msg.type}" is not a subscriber message; producers connect to /v1/produce`, 'type');
    }
  }

  /** Whether any subscription covers `stream` (and the token lets this connection watch it). */
  follows(stream: string): boolean {
    return this.matching(stream).length > 0;
  }

  /** What this connection receives of each result of `stream`; null = no results. */
  viewFor(stream: string): ResultView | null {
    let view = this.views.get(stream);
    if (view !== undefined) return view;
    const subs = this.matching(stream);
    const wants = (w: Want) => subs.some((s) => s.want.has(w));
    view =
      wants('coefficients') || wants('top_k') || wants('signal') || wants('measurements') || wants('quality')
        ? {
            coefficients: wants('coefficients'),
            topK: Math.max(0, ...subs.filter((s) => s.want.has('top_k')).map((s) => s.topK)),
            signal: wants('signal'),
            measurements: wants('measurements'),
          }
        : null;
    this.views.set(stream, view);
    return view;
  }

  wantsAlerts(stream: string): boolean {
    return this.matching(stream).some((s) => s.want.has('alerts'));
  }

  dispose(): void {
    this.outbox.dispose();
    this.subs.clear();
    this.views.clear();
  }

  private matching(stream: string): Subscription[] {
    if (!mayAct(this.principal, 'watch', stream)) return [];
    return [...this.subs.values()].filter((s) => s.patterns.some((p) => matchesStreamPattern(p, stream)));
  }

  private subscribe(msg: SubscribeMessage): void {
    const patterns = typeof msg.streams === 'string' ? [msg.streams] : msg.streams;
    patterns.forEach((p, i) => {
      // A name without wildcards is a request for that stream: refuse it clearly when not allowed.
      if (!p.includes('*') && !mayAct(this.principal, 'watch', p)) {
        throw new RequestError('forbidden', `this token may not watch stream "${p}"`, typeof msg.streams === 'string' ? 'streams' : `streams[${i}]`);
      }
    });
    if (this.subs.size >= this.core.config.limits.maxSubscriptionsPerConnection) {
      throw new RequestError('limit_reached', `one connection may hold at most ${this.core.config.limits.maxSubscriptionsPerConnection} subscriptions`);
    }
    const sub: Subscription = { id: `sub-${this.nextId++}`, patterns, want: new Set(msg.want), topK: msg.top_k ?? DEFAULT_TOP_K };
    this.subs.set(sub.id, sub);
    this.views.clear();
    this.core.fanout.subscriptionsChanged();
    this.outbox.policy = msg.when_behind;
    const declarations = this.core.declarationsFollowedBy(this);
    this.send({ v: 1, type: 'subscribed', ref: msg.ref, id: sub.id, streams: declarations });
    if (msg.resume_after) this.resume(msg.resume_after);
  }

  private unsubscribe(msg: UnsubscribeMessage): void {
    if (!this.subs.delete(msg.id)) throw new RequestError('invalid_field', `no subscription "${msg.id}" on this connection`, 'id');
    this.views.clear();
    this.core.fanout.subscriptionsChanged();
    this.send({ v: 1, type: 'unsubscribed', ref: msg.ref, id: msg.id });
  }

  /** Replays retained results after the given seqs, announcing what is no longer held. */
  private resume(after: Record<string, number>): void {
    for (const [stream, lastSeen] of Object.entries(after)) {
      const view = this.viewFor(stream);
      if (view === null) continue;
      const retained = this.core.fanout.retainedAfter(stream, lastSeen);
      const lastKnown = retained.length > 0 ? retained[retained.length - 1]!.seq : this.core.lastAcceptedSeq(stream);
      if (lastKnown === undefined || lastKnown <= lastSeen) continue;
      const firstHeld = retained[0]?.seq ?? lastKnown + 1;
      if (firstHeld > lastSeen + 1) {
        // How many results the span held is unknown (seqs may have had gaps): the span bounds it.
        const to = firstHeld - 1;
        this.outbox.sendMissed({ stream, fromSeq: lastSeen + 1, toSeq: to, count: to - lastSeen, reason: 'not_retained' });
      }
      for (const r of retained) this.core.fanout.deliverTo(this, r);
    }
  }
}
