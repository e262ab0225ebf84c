import { describe, expect, it } from 'vitest';
import { Outbox, type OutboxSocket } from '../outbox.js';

// The outbox's policies against their definitions (daemon/outbox.ts, docs/daemon.md): judged by
// bufferedAmount plus unconfirmed bytes, high/low watermarks, per-policy handling of results
// while behind, notices kept in order, and the hard cap.

class FakeSocket implements OutboxSocket {
  bufferedAmount = 0;
  sent: Uint8Array[] = [];
  callbacks: Array<() => void> = [];
  closedWith: [number, string] | undefined;
  terminated = false;
  send(data: Uint8Array, cb: () => void): void {
    this.sent.push(data);
    this.callbacks.push(cb);
  }
  /** The peer read everything: fire the send callbacks. */
  drain(): void {
    for (const cb of this.callbacks.splice(0)) cb();
  }
  close(code: number, reason: string): void {
    this.closedWith = [code, reason];
  }
  terminate(): void {
    this.terminated = true;
  }
}

const bytes = (tag: number, size = 100) => new Uint8Array(size).fill(tag);
const limits = { highBytes: 250, lowBytes: 50, hardCapBytes: 10_000, maxNotices: 3 };

function setup(policy: Outbox['policy']) {
  const socket = new FakeSocket();
  const events: string[] = [];
  const outbox = new Outbox(socket, limits, {
    encodeMissed: (m) => new TextEncoder().encode(`missed ${m.stream} ${m.fromSeq}-${m.toSeq} x${m.count}${m.reason === 'subscriber_behind' ? '' : ` ${m.reason}`}`),
    skipped: (n, p) => events.push(`skipped ${n} ${p}`),
    disconnected: (reason) => events.push(`disconnected ${reason}`),
  });
  outbox.policy = policy;
  return { socket, outbox, events };
}

const text = (b: Uint8Array) => (b.length === 100 ? `r${b[0]}` : new TextDecoder().decode(b));

describe('Outbox', () => {
  it('sends while under the high watermark, then drops with a notice once caught up', () => {
    const { socket, outbox, events } = setup('drop_with_notice');
    for (let seq = 0; seq < 6; seq++) outbox.sendResult('s', seq, () => bytes(seq));
    // 3 results (300 bytes unconfirmed) pass the high watermark of 250: 3, 4, 5 are skipped.
    expect(socket.sent.map(text)).toEqual(['r0', 'r1', 'r2']);
    expect(outbox.stats()).toMatchObject({ behind: true, pendingBytes: 300, heldResults: 0, skippedStreams: 1 });
    socket.drain();
    expect(socket.sent.map(text)).toEqual(['r0', 'r1', 'r2', 'missed s 3-5 x3']);
    expect(outbox.stats().behind).toBe(false);
    expect(events).toEqual(['skipped 1 drop_with_notice', 'skipped 1 drop_with_notice', 'skipped 1 drop_with_notice']);
  });

  it('counts bytes the socket still buffers (bufferedAmount) as well', () => {
    const { socket, outbox } = setup('drop_with_notice');
    socket.bufferedAmount = 200;
    outbox.sendResult('s', 0, () => bytes(0));
    expect(outbox.stats().behind).toBe(true);
  });

  it('keep_latest holds only the newest result per stream and sends it after the notice', () => {
    const { socket, outbox } = setup('keep_latest');
    for (let seq = 0; seq < 3; seq++) outbox.sendResult('a', seq, () => bytes(seq));
    let encoded = 0;
    for (let seq = 3; seq < 9; seq++) {
      outbox.sendResult('a', seq, () => (encoded++, bytes(seq)));
      outbox.sendResult('b', seq, () => (encoded++, bytes(100 + seq)));
    }
    expect(outbox.stats()).toMatchObject({ heldResults: 2 });
    expect(encoded).toBe(0); // nothing encoded while held
    socket.drain();
    expect(socket.sent.slice(3).map(text)).toEqual(['missed a 3-7 x5', 'missed b 3-7 x5', 'r8', 'r108']);
    expect(encoded).toBe(2);
  });

  it('holds notices in order while behind and disconnects when too many pile up', () => {
    const { socket, outbox, events } = setup('drop_with_notice');
    for (let seq = 0; seq < 3; seq++) outbox.sendResult('s', seq, () => bytes(seq));
    outbox.sendNotice(bytes(7, 10));
    outbox.sendNotice(bytes(8, 10));
    expect(outbox.stats().heldNotices).toBe(2);
    outbox.sendNotice(bytes(9, 10));
    outbox.sendNotice(bytes(10, 10)); // the fourth exceeds maxNotices = 3
    expect(events).toEqual(['disconnected too_many_notices']);
    expect(socket.terminated).toBe(true);
    expect(outbox.sendResult('s', 9, () => bytes(9))).toBe(false);
  });

  it('merges drops announced upstream while behind into one range per stream and reason, in place, without a limit', () => {
    const { socket, outbox, events } = setup('drop_with_notice');
    for (let seq = 0; seq < 3; seq++) outbox.sendResult('s', seq, () => bytes(seq));
    outbox.sendMissed({ stream: 'a', fromSeq: 4, toSeq: 4, count: 1, reason: 'dropped_by_queue' });
    outbox.sendNotice(bytes(7, 10));
    // Far more drops than maxNotices (3): merged, never a reason to disconnect.
    for (let seq = 5; seq < 50; seq += 2) outbox.sendMissed({ stream: 'a', fromSeq: seq, toSeq: seq, count: 1, reason: 'dropped_by_queue' });
    outbox.sendMissed({ stream: 'a', fromSeq: 6, toSeq: 6, count: 1, reason: 'solver_failed' });
    outbox.sendMissed({ stream: 'b', fromSeq: 2, toSeq: 3, count: 2, reason: 'dropped_by_queue' });
    expect(events).toEqual([]);
    expect(outbox.stats().heldNotices).toBe(4);
    socket.drain();
    // Where the first of each stood, then the alerts and events between them, in order.
    expect(socket.sent.slice(3).map(text)).toEqual([
      'missed a 4-49 x24 dropped_by_queue',
      '\u0007'.repeat(10),
      'missed a 6-6 x1 solver_failed',
      'missed b 2-3 x2 dropped_by_queue',
    ]);
    // Caught up: the next drop goes out at once.
    outbox.sendMissed({ stream: 'a', fromSeq: 60, toSeq: 60, count: 1, reason: 'dropped_by_queue' });
    expect(text(socket.sent.at(-1)!)).toBe('missed a 60-60 x1 dropped_by_queue');
  });

  it('disconnect closes with 1013 once behind', () => {
    const { socket, outbox, events } = setup('disconnect');
    for (let seq = 0; seq < 4; seq++) outbox.sendResult('s', seq, () => bytes(seq));
    expect(socket.closedWith).toEqual([1013, 'subscriber fell behind (when_behind: disconnect)']);
    expect(events).toEqual(['skipped 1 disconnect', 'disconnected fell_behind']);
  });

  it('terminates beyond the hard cap', () => {
    const { socket, outbox, events } = setup('keep_latest');
    outbox.sendNotice(bytes(1, 20_000));
    expect(socket.terminated).toBe(true);
    expect(events).toEqual(['disconnected hard_cap']);
  });
});
