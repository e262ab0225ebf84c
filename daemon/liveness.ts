/**
 * Whether one peer is alive, judged from pings. A ping waits behind everything sent to the peer
 * before it, so its answer is due half a heartbeat after it was sent (the other half absorbs
 * timer jitter: judged at the next heartbeat) plus the time a live peer takes to read what was
 * ahead of it, at the slowest rate a peer may read (`minReadBytesPerSecond`). Only what was sent
 * since the last answered ping can still be ahead of it. Without a backlog this is the plain rule
 * (answer before the next heartbeat); a subscriber working through megabytes of results gets
 * the time those take at that rate, and one that stopped reading is found dead all the same.
 */
export class PeerLiveness {
  /** Bytes sent before the last answered ping: the peer has read all of them. */
  private readThrough = 0;
  private outstanding: { sentAt: number; bytesAhead: number } | undefined;

  /** `sentBytes` counts every byte handed to the peer's socket so far. */
  constructor(private readonly sentBytes: () => number) {}

  /** The peer answered the ping. */
  answered(): void {
    if (this.outstanding === undefined) return;
    this.readThrough = this.outstanding.bytesAhead;
    this.outstanding = undefined;
  }

  /** At a heartbeat: send a ping now, keep waiting for the outstanding one, or give up on the peer. */
  check(now: number, heartbeatMs: number, minReadBytesPerSecond: number): 'ping' | 'wait' | 'dead' {
    const ping = this.outstanding;
    if (ping === undefined) {
      this.outstanding = { sentAt: now, bytesAhead: this.sentBytes() };
      return 'ping';
    }
    const readingMs = (1000 * (ping.bytesAhead - this.readThrough)) / minReadBytesPerSecond;
    return now - ping.sentAt >= heartbeatMs / 2 + readingMs ? 'dead' : 'wait';
  }
}
