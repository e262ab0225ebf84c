import { describe, expect, it } from 'vitest';
import { FrameQueue } from '../frameQueue.js';

// Checks against the three declared overflow policies (definitions in pipeline/frameQueue.ts).
describe('FrameQueue', () => {
  it('refuse_new keeps what waits and refuses the newcomer', () => {
    const q = new FrameQueue<number>({ capacity: 2, policy: 'refuse_new' });
    expect(q.offer(1)).toEqual({ accepted: true, displaced: [] });
    expect(q.offer(2)).toEqual({ accepted: true, displaced: [] });
    expect(q.offer(3)).toEqual({ accepted: false });
    expect([q.shift(), q.shift(), q.shift()]).toEqual([1, 2, undefined]);
  });

  it('drop_oldest displaces the oldest waiting item', () => {
    const q = new FrameQueue<number>({ capacity: 2, policy: 'drop_oldest' });
    q.offer(1);
    q.offer(2);
    expect(q.offer(3)).toEqual({ accepted: true, displaced: [1] });
    expect(q.takeAll()).toEqual([2, 3]);
  });

  it('keep_latest displaces everything waiting', () => {
    const q = new FrameQueue<number>({ capacity: 3, policy: 'keep_latest' });
    q.offer(1);
    q.offer(2);
    q.offer(3);
    expect(q.offer(4)).toEqual({ accepted: true, displaced: [1, 2, 3] });
    expect(q.length).toBe(1);
    expect(q.shift()).toBe(4);
  });

  it('stays FIFO across many offers and shifts (internal compaction)', () => {
    const q = new FrameQueue<number>({ capacity: 5, policy: 'refuse_new' });
    const out: number[] = [];
    let next = 0;
    for (let round = 0; round < 200; round++) {
      while (q.offer(next).accepted) next++;
      for (let i = 0; i < 3; i++) out.push(q.shift()!);
    }
    expect(out).toEqual(Array.from({ length: out.length }, (_, i) => i));
    expect(q.length).toBeLessThanOrEqual(5);
  });
});
