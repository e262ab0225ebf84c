/**
 * One subscriber's bounded outbox. How far behind a subscriber is = the socket's
 * `bufferedAmount` plus the bytes whose send callbacks have not fired yet (`bufferedAmount`
 * alone reads 0 until the kernel buffer is full). Above the high watermark the subscriber is
 * *behind* and its `when_behind` policy decides what happens to results:
 * - keep_latest: hold only the newest result per stream; older ones are skipped;
 * - drop_with_notice: skip results;
 * - disconnect: close the connection (1013, try again later).
 * Skipped results are counted and announced with one `missed` notice per stream (reason
 * `subscriber_behind`) once the subscriber catches up (below the low watermark). Notices
 * (alerts, upstream missed ranges, stream events) are held in a bounded FIFO while behind.
 * Unsent bytes beyond the hard cap, or more held notices than allowed, terminate the connection.
 * Memory per subscriber is therefore bounded by the hard cap, one held result per stream and the
 * notice limit, whatever the subscriber does: it never slows the solvers or other subscribers.
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

export interface OutboxHooks {
  /** Encodes the `missed` notice for results skipped while behind. */
  encodeMissed(stream: string, fromSeq: number, toSeq: number, count: number): Uint8Array;
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
  private readonly notices: Uint8Array[] = [];
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

  /** A message that is not a result: sent now, or held in order while behind. */
  sendNotice(bytes: Uint8Array): void {
    if (this.closed) return;
    if (!this.behind) return this.write(bytes);
    if (this.notices.length >= this.limits.maxNotices) return this.shut('too_many_notices');
    this.notices.push(bytes);
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
    const skipped = [...this.skippedRanges];
    this.skippedRanges.clear();
    const held = [...this.held];
    this.held.clear();
    for (const n of notices) if (!this.closed) this.write(n);
    for (const [stream, r] of skipped) if (!this.closed) this.write(this.hooks.encodeMissed(stream, r.fromSeq, r.toSeq, r.count));
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
