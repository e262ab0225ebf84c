import { describe, expect, it } from 'vitest';
import { SequenceTracker } from '../ordering.js';

// Checks against the definition of the ordering stage (pipeline/ordering.ts): in-order, gaps,
// late (reordered) and duplicate frames.
describe('SequenceTracker', () => {
  it('lets a fresh stream start at any sequence number, then expects the next one', () => {
    const t = new SequenceTracker();
    expect(t.judge(41)).toEqual({ kind: 'in_order' });
    t.accept(41);
    expect(t.nextSeq).toBe(42);
    expect(t.judge(42)).toEqual({ kind: 'in_order' });
  });

  it('reports the number of missing frames on a gap', () => {
    const t = new SequenceTracker(10);
    expect(t.judge(13)).toEqual({ kind: 'gap', missing: 3 });
    t.accept(13);
    expect(t.nextSeq).toBe(14);
  });

  it('tells a frame that fell into a gap (late) from one already received (duplicate)', () => {
    const t = new SequenceTracker(0);
    t.accept(0);
    t.accept(1);
    t.accept(5); // 2..4 missing
    expect(t.judge(3)).toEqual({ kind: 'late' });
    expect(t.judge(1)).toEqual({ kind: 'duplicate' });
    expect(t.judge(5)).toEqual({ kind: 'duplicate' });
  });

  it('judging does not consume a sequence number (a refused frame may be sent again)', () => {
    const t = new SequenceTracker(7);
    expect(t.judge(7)).toEqual({ kind: 'in_order' });
    expect(t.judge(7)).toEqual({ kind: 'in_order' });
    expect(t.nextSeq).toBe(7);
  });

  it('resumes from a persisted next sequence number', () => {
    const t = new SequenceTracker(100);
    expect(t.judge(99)).toEqual({ kind: 'duplicate' });
    expect(t.judge(100)).toEqual({ kind: 'in_order' });
  });
});
