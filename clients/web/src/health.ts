/**
 * Per-stream health figures computed from what the page receives: result rate over a sliding
 * window, and gaps in the sequence of results.
 */

/** Arrivals per second over a sliding window, from a fixed ring of arrival times. */
export class RateMeter {
  private readonly stamps: Float64Array;
  private next = 0;
  private filled = 0;

  constructor(private readonly windowMs: number, capacity = 1024) {
    this.stamps = new Float64Array(capacity);
  }

  record(now: number): void {
    this.stamps[this.next] = now;
    this.next = (this.next + 1) % this.stamps.length;
    if (this.filled < this.stamps.length) this.filled++;
  }

  /** Arrivals per second in (now − window, now]; 0 before two arrivals. */
  perSecond(now: number): number {
    const since = now - this.windowMs;
    let count = 0;
    let oldest = now;
    for (let i = 0; i < this.filled; i++) {
      const t = this.stamps[(this.next - 1 - i + this.stamps.length) % this.stamps.length]!;
      if (t <= since) break;
      count++;
      oldest = t;
    }
    if (count < 2) return 0;
    // Intervals between the arrivals seen, over the time since the oldest of them: right
    // before a full window has passed, and falling towards 0 when the stream goes quiet.
    const spanMs = now - oldest;
    return spanMs > 0 ? (count - 1) / (spanMs / 1000) : 0;
  }
}

/**
 * Follows a stream's result sequence numbers. A jump forward reports the results in between
 * as a gap; a jump backwards means the stream started over (re-declared) and resets.
 */
export class SequenceFollower {
  private last = -1;

  /** Returns how many sequence numbers were passed over just before this one. */
  see(seq: number): number {
    const gap = this.last >= 0 && seq > this.last + 1 ? seq - this.last - 1 : 0;
    this.last = seq;
    return gap;
  }

  /** Marks results up to `seq` as accounted for elsewhere (a missed notice), so they are no gap. */
  passOver(seq: number): void {
    if (seq > this.last) this.last = seq;
  }
}
