/**
 * One subscriber's bounded outbox. How far behind a subscriber is = the socket's
 * `bufferedAmount` plus the bytes whose send callbacks have not fired yet (`bufferedAmount`
 * alone reads 0 until the kernel buffer is full). Above the high watermark the subscriber is
 * *behind* and its `when_behind` policy decides what happens to results:
 * - keep_latest: hold only the newest result per stream; older ones are skipped;
 * - drop_with_notice: skip results;
 * - disconnect: close the connection (1013, try again later).
 * Skipped results are counted and announced with one `missed` notice per stream (reason
 * `subscriber_behind`) once the subscriber catches up (below the low watermark). Notices are
 * held in order while behind: alerts and stream events one by one, up to `maxNotices`; drops
 * announced upstream (`missed` ranges) merged into one range per stream and reason, kept where
 * the first of them stood — a thousand streams dropping frames while a dashboard is behind must
 * not cost it its connection. Unsent bytes beyond the hard cap, or more held alerts and events
 * than allowed, terminate the connection. Memory per subscriber is therefore bounded by the hard
 * cap, one held result and a few ranges per stream and the notice limit, whatever the subscriber
 * does: it never slows the solvers or other subscribers.
 */

export type BehindPolicy = 'keep_latest' | 'drop_with_notice' | 'disconnect';

export interface OutboxSocket {
  readonly bufferedAmount: number;
  send(data: Uint8Array, cb: (err?: Error) => void): void;
  close(code: number, reason: string): void;
  terminate(): void;
}

export interface OutboxLimits {
  highBytes: number;
  lowBytes: number;
  hardCapBytes: number;
  maxNotices: number;
}

/** Sequence numbers of a stream that a subscriber will not get as results, and why. */
export interface MissedSpan {
  stream: string;
  fromSeq: number;
  toSeq: number;
  count: number;
  reason: string;
}

export interface OutboxHooks {
  /** Encodes a `missed` notice (skipped while behind: reason `subscriber_behind`). */
  encodeMissed(span: MissedSpan): Uint8Array;
  /** Results skipped (for metrics). */
  skipped(count: number, policy: BehindPolicy): void;
  /** The outbox closed the connection. */
  disconnected(reason: 'fell_behind' | 'hard_cap' | 'too_many_notices'): void;
}

interface Skipped {
  fromSeq: number;
  toSeq: number;
  count: number;
}

/** A notice held while behind: bytes as they came, or a drop range that later ones merge into. */
type HeldNotice = { bytes: Uint8Array } | { span: MissedSpan };

export interface OutboxStats {
  pendingBytes: number;
  behind: boolean;
  heldResults: number;
  heldNotices: number;
  skippedStreams: number;
  closed: boolean;
}

const TRY_AGAIN_LATER = 1013;
/** After a polite close, how long the peer gets before the socket is destroyed. */
const CLOSE_GRACE_MS = 1000;

export class Outbox {
  policy: BehindPolicy = 'drop_with_notice';
  private unconfirmed = 0;
  private behind = false;
  private closed = false;
  private readonly notices: HeldNotice[] = [];
  /** Alerts and stream events among the held notices (the ones maxNotices bounds). */
  private heldEvents = 0;
  /** The held drop range of each stream and reason, to merge later ones into. */
  private readonly heldSpans = new Map<string, MissedSpan>();
  private readonly held = new Map<string, { seq: number; encode: () => Uint8Array }>();
  private readonly skippedRanges = new Map<string, Skipped>();

  constructor(
    private readonly socket: OutboxSocket,
    private readonly limits: OutboxLimits,
    private readonly hooks: OutboxHooks,
  ) {}

  pendingBytes(): number {
    return this.socket.bufferedAmount + this.unconfirmed;
  }

  stats(): OutboxStats {
    return {
      pendingBytes: this.pendingBytes(),
      behind: this.behind,
      heldResults: this.held.size,
      heldNotices: this.notices.length,
      skippedStreams: this.skippedRanges.size,
      closed: this.closed,
    };
  }

  /** A message that is neither a result nor a drop range: sent now, or held in order while behind. */
  sendNotice(bytes: Uint8Array): void {
    if (this.closed) return;
    if (!this.behind) return this.write(bytes);
    if (this.heldEvents >= this.limits.maxNotices) return this.shut('too_many_notices');
    this.notices.push({ bytes });
    this.heldEvents++;
  }

  /**
   * Frames dropped upstream: announced now, or merged into the stream's held range for `reason`.
   * `encoded` gives the notice's bytes when the caller shares one encoding among subscribers.
   */
  sendMissed(span: MissedSpan, encoded: () => Uint8Array = () => this.hooks.encodeMissed(span)): void {
    if (this.closed) return;
    if (!this.behind) return this.write(encoded());
    const key = `${span.stream}\u0000${span.reason}`;
    const held = this.heldSpans.get(key);
    if (held === undefined) {
      const copy = { ...span };
      this.heldSpans.set(key, copy);
      this.notices.push({ span: copy });
      return;
    }
    held.fromSeq = Math.min(held.fromSeq, span.fromSeq);
    held.toSeq = Math.max(held.toSeq, span.toSeq);
    held.count += span.count;
  }

  /** A result of `stream`; `encode` is called only if and when it is sent. */
  sendResult(stream: string, seq: number, encode: () => Uint8Array): boolean {
    if (this.closed) return false;
    if (!this.behind) {
      this.write(encode());
      return true;
    }
    switch (this.policy) {
      case 'disconnect':
        this.skip(stream, seq);
        this.shut('fell_behind');
        return false;
      case 'drop_with_notice':
        this.skip(stream, seq);
        return false;
      case 'keep_latest': {
        const previous = this.held.get(stream);
        if (previous) this.skip(stream, previous.seq);
        this.held.set(stream, { seq, encode });
        return false;
      }
    }
  }

  /** Forget the connection (it closed): drop everything held. */
  dispose(): void {
    this.closed = true;
    this.notices.length = 0;
    this.heldEvents = 0;
    this.heldSpans.clear();
    this.held.clear();
    this.skippedRanges.clear();
  }

  private skip(stream: string, seq: number): void {
    const r = this.skippedRanges.get(stream);
    if (r) {
      r.fromSeq = Math.min(r.fromSeq, seq);
      r.toSeq = Math.max(r.toSeq, seq);
      r.count++;
    } else {
      this.skippedRanges.set(stream, { fromSeq: seq, toSeq: seq, count: 1 });
    }
    this.hooks.skipped(1, this.policy);
  }

  private write(bytes: Uint8Array): void {
    this.unconfirmed += bytes.byteLength;
    this.socket.send(bytes, () => {
      this.unconfirmed -= bytes.byteLength;
      if (this.behind && !this.closed && this.pendingBytes() < this.limits.lowBytes) this.catchUp();
    });
    const pending = this.pendingBytes();
    if (pending > this.limits.hardCapBytes) return this.shut('hard_cap');
    if (pending > this.limits.highBytes) this.behind = true;
  }

  /** Below the low watermark again: send held notices, the missed ranges, then held results. */
  private catchUp(): void {
    this.behind = false;
    const notices = this.notices.splice(0);
    this.heldEvents = 0;
    this.heldSpans.clear();
    const skipped = [...this.skippedRanges];
    this.skippedRanges.clear();
    const held = [...this.held];
    this.held.clear();
    for (const n of notices) if (!this.closed) this.write('bytes' in n ? n.bytes : this.hooks.encodeMissed(n.span));
    for (const [stream, r] of skipped) {
      if (!this.closed) this.write(this.hooks.encodeMissed({ stream, fromSeq: r.fromSeq, toSeq: r.toSeq, count: r.count, reason: 'subscriber_behind' }));
    }
    for (const [, h] of held) if (!this.closed) this.write(h.encode());
  }

  private shut(reason: 'fell_behind' | 'hard_cap' | 'too_many_notices'): void {
    if (this.closed) return;
    this.dispose();
    this.hooks.disconnected(reason);
    if (reason === 'fell_behind') {
      this.socket.close(TRY_AGAIN_LATER, 'subscriber fell behind (when_behind: disconnect)');
      setTimeout(() => this.socket.terminate(), CLOSE_GRACE_MS).unref();
    } else {
      this.socket.terminate();
    }
  }
}
