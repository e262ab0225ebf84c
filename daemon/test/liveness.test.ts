import { describe, expect, it } from 'vitest';
import { PeerLiveness } from '../liveness.js';

// The heartbeat's rule, beat by beat (heartbeat 1000 ms, slowest reading 1000 bytes/s).

describe('PeerLiveness', () => {
  it('without a backlog, a ping must be answered before the next heartbeat', () => {
    let sent = 0;
    const peer = new PeerLiveness(() => sent);
    expect(peer.check(0, 1000, 1000)).toBe('ping');
    peer.answered();
    expect(peer.check(1000, 1000, 1000)).toBe('ping');
    expect(peer.check(2000, 1000, 1000)).toBe('dead');
  });

  it('gives a ping the time its backlog takes to read at the slowest rate, counted from the last answered ping', () => {
    let sent = 100;
    const peer = new PeerLiveness(() => sent);
    expect(peer.check(0, 1000, 1000)).toBe('ping');
    peer.answered(); // the peer has read the first 100 bytes
    sent = 5100; // 5000 more bytes go out before the next ping: 5 s of reading at 1000 B/s
    expect(peer.check(1000, 1000, 1000)).toBe('ping');
    for (const now of [2000, 3000, 4000, 5000, 6000]) expect(peer.check(now, 1000, 1000)).toBe('wait');
    // due at 1000 + 500 + 5000 ms
    expect(peer.check(6500, 1000, 1000)).toBe('dead');
  });

  it('an answer resets the count: bytes before an answered ping are read', () => {
    let sent = 5000;
    const peer = new PeerLiveness(() => sent);
    expect(peer.check(0, 1000, 1000)).toBe('ping');
    expect(peer.check(4000, 1000, 1000)).toBe('wait');
    peer.answered();
    sent = 5000; // nothing new: the next ping gets no grace
    expect(peer.check(5000, 1000, 1000)).toBe('ping');
    expect(peer.check(6000, 1000, 1000)).toBe('dead');
  });
});
