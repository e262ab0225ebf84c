/**
 * Everything the page knows, updated per message and read per animation frame. Message
 * handlers only record (the latest result per stream, counters, trend samples); decoding of
 * coefficient arrays and all drawing wait for the frame loop, so a burst of messages costs one
 * redraw, not one per message.
 */
import type {
  AlertMessage,
  DaemonToSubscriber,
  MissedMessage,
  ResultMessage,
  StreamDeclaration,
} from '../../../protocol/messages.js';
import type { DaemonStreamView } from './daemon-view.js';
import { flagSeverity } from './flags.js';
import { RateMeter, SequenceFollower } from './health.js';
import { TrendRing } from './ring.js';
import { recoveryShape, type RecoveryShape } from './stream-kind.js';

/** Trend columns, in TrendRing order. */
export const TREND_RESIDUAL = 0;
export const TREND_ITERATIONS = 1;
export const TREND_SUPPORT = 2;
/** Trend samples kept per stream: five minutes at 20 results/s. */
export const TREND_CAPACITY = 6000;
/** Alert ledger entries kept. */
export const LEDGER_CAPACITY = 200;
/** A stream counts as behind for this long after a sign of it (a notice, a skip, a late result). */
export const BEHIND_HOLD_MS = 3000;
/** A result arriving this much later than the quickest one so far is a sign of being behind. */
export const LATE_ARRIVAL_MS = 1000;
/** Results per second are averaged over this window. */
export const RATE_WINDOW_MS = 5000;

export interface StreamState {
  readonly name: string;
  declaration: StreamDeclaration;
  shape: RecoveryShape;
  open: boolean;
  latest: ResultMessage | null;
  latestAt: number;
  results: number;
  readonly rate: RateMeter;
  readonly sequence: SequenceFollower;
  /** Results the daemon told us we missed, by reason. */
  missed: Map<string, number>;
  /** Results that never arrived and no notice covered (gaps in the sequence numbers). */
  gaps: number;
  lastBehindAt: number;
  /** Open alerts by rule index. */
  openAlerts: Map<number, AlertMessage>;
  readonly trends: TrendRing;
  /** The daemon's figures for the stream (GET /v1/streams), when polled. */
  daemon: DaemonStreamView | null;
  /** Bumped on every change; views compare it with the version they last drew. */
  version: number;
}

export interface LedgerEntry {
  alert: AlertMessage;
  receivedAt: number;
  /** Acquisition time of the frame the alert names, when its result was seen. */
  frameTime: number | null;
}

/** Result flags saying frames went missing before the solver (see pipeline/quality.ts). */
const UPSTREAM_GAP_FLAGS: ReadonlySet<string> = new Set(['sequence_gap', 'frames_dropped_before']);

export class DashboardStore {
  readonly streams = new Map<string, StreamState>();
  readonly ledger: LedgerEntry[] = [];
  /** Bumped when the set of streams or the ledger changes. */
  version = 0;
  /** Quickest receivedAt − solved_at seen on this connection (absorbs clock offset). */
  private quickestArrival = Number.POSITIVE_INFINITY;
  lastError: string | null = null;

  apply(message: DaemonToSubscriber, receivedAt: number): void {
    switch (message.type) {
      case 'subscribed':
        for (const declaration of message.streams) this.declare(declaration);
        this.quickestArrival = Number.POSITIVE_INFINITY;
        this.version++;
        break;
      case 'stream_event':
        if (message.event === 'declared' && message.declaration) this.declare(message.declaration);
        else if (message.event === 'closed') {
          const stream = this.streams.get(message.stream);
          if (stream) {
            stream.open = false;
            stream.version++;
          }
        }
        this.version++;
        break;
      case 'result':
        this.result(message, receivedAt);
        break;
      case 'alert':
        this.alert(message, receivedAt);
        break;
      case 'missed':
        this.missed(message, receivedAt);
        break;
      case 'error':
        this.lastError = `${message.code}: ${message.detail}`;
        this.version++;
        break;
      case 'unsubscribed':
        break;
    }
  }

  /** Takes the daemon's figures per stream (streams the page does not know yet are skipped). */
  applyDaemonView(view: ReadonlyMap<string, DaemonStreamView>): void {
    for (const [name, figures] of view) {
      const stream = this.streams.get(name);
      if (stream) stream.daemon = figures;
    }
  }

  /** True when any stream showed a sign of this page falling behind in the last moments. */
  behind(now: number): boolean {
    for (const stream of this.streams.values()) if (isBehind(stream, now)) return true;
    return false;
  }

  private declare(declaration: StreamDeclaration): void {
    const known = this.streams.get(declaration.name);
    if (known) {
      known.declaration = declaration;
      known.shape = recoveryShape(declaration);
      known.open = true;
      known.version++;
      return;
    }
    this.streams.set(declaration.name, {
      name: declaration.name,
      declaration,
      shape: recoveryShape(declaration),
      open: true,
      latest: null,
      latestAt: 0,
      results: 0,
      rate: new RateMeter(RATE_WINDOW_MS),
      sequence: new SequenceFollower(),
      missed: new Map(),
      gaps: 0,
      lastBehindAt: Number.NEGATIVE_INFINITY,
      openAlerts: new Map(),
      trends: new TrendRing(TREND_CAPACITY, 3),
      daemon: null,
      version: 0,
    });
  }

  private result(message: ResultMessage, receivedAt: number): void {
    const stream = this.streams.get(message.stream);
    if (!stream) return; // results only follow a declaration; a stray one has nothing to draw into
    const gap = stream.sequence.see(message.seq);
    stream.gaps += gap;
    // A gap the pipeline flagged happened before solving (producer side); any other gap means
    // results meant for this page were passed over.
    if (gap > 0 && !message.flags.some((f) => UPSTREAM_GAP_FLAGS.has(f))) stream.lastBehindAt = receivedAt;
    const arrival = receivedAt - message.solved_at;
    if (arrival < this.quickestArrival) this.quickestArrival = arrival;
    else if (arrival - this.quickestArrival > LATE_ARRIVAL_MS) stream.lastBehindAt = receivedAt;
    stream.latest = message;
    stream.latestAt = receivedAt;
    stream.results++;
    stream.rate.record(receivedAt);
    const ev = message.evidence;
    stream.trends.push(message.time, [ev.relative_residual, ev.iterations, ev.support_size]);
    stream.version++;
  }

  private alert(message: AlertMessage, receivedAt: number): void {
    const stream = this.streams.get(message.stream);
    if (stream) {
      if (message.state === 'raised') stream.openAlerts.set(message.rule, message);
      else stream.openAlerts.delete(message.rule);
      stream.version++;
    }
    const latest = stream?.latest;
    this.ledger.unshift({ alert: message, receivedAt, frameTime: latest && latest.seq === message.seq ? latest.time : null });
    if (this.ledger.length > LEDGER_CAPACITY) this.ledger.length = LEDGER_CAPACITY;
    this.version++;
  }

  private missed(message: MissedMessage, receivedAt: number): void {
    const stream = this.streams.get(message.stream);
    if (!stream) return;
    stream.missed.set(message.reason, (stream.missed.get(message.reason) ?? 0) + message.count);
    stream.sequence.passOver(message.to_seq);
    if (message.reason === 'subscriber_behind') stream.lastBehindAt = receivedAt;
    stream.version++;
  }
}

export function isBehind(stream: StreamState, now: number): boolean {
  return now - stream.lastBehindAt < BEHIND_HOLD_MS;
}

/** Results of this stream the page will never see, whatever the reason. */
export function missedTotal(stream: StreamState): number {
  let total = stream.gaps;
  for (const count of stream.missed.values()) total += count;
  return total;
}

/** Results older than this make a stream look quiet. */
export const QUIET_AFTER_MS = 5000;

/**
 * One word for a stream's state at a glance: `alerting` (an alert is open), `uneasy` (the
 * latest result carries a flag worth a look, or the page is behind on it), `quiet` (closed, or
 * no result lately), `steady` otherwise.
 */
export type StreamHealth = 'alerting' | 'uneasy' | 'quiet' | 'steady';

export function healthOf(stream: StreamState, now: number): StreamHealth {
  if (stream.openAlerts.size > 0) return 'alerting';
  if (!stream.open || !stream.latest || now - stream.latestAt > QUIET_AFTER_MS) return 'quiet';
  if (isBehind(stream, now) || stream.latest.flags.some((f) => flagSeverity(f) !== 'note')) return 'uneasy';
  return 'steady';
}
