/**
 * Sequence bookkeeping for one stream. Frames must be solved in sequence order, so a frame is
 * judged on arrival against the next sequence number the stream expects:
 * - equal: in order;
 * - higher: accepted, with a gap of the missing numbers (flagged on its result);
 * - lower and inside a remembered gap: it arrived after later frames, refused `out_of_order`;
 * - lower otherwise: already seen, refused `duplicate`.
 * The first frame of a fresh stream may start anywhere.
 */

export type SequenceVerdict =
  | { kind: 'in_order' }
  | { kind: 'gap'; missing: number }
  | { kind: 'late' }
  | { kind: 'duplicate' };

/** How many gap ranges are remembered to tell a late frame from a duplicate. */
const REMEMBERED_GAPS = 64;

export class SequenceTracker {
  /** Next expected sequence number; undefined until the first frame of a fresh stream. */
  private expected: number | undefined;
  /** Missing ranges [from, to] (inclusive), oldest first. */
  private readonly gaps: Array<[number, number]> = [];

  constructor(nextSeq?: number) {
    this.expected = nextSeq;
  }

  /** The sequence number the stream expects next (what a reconnecting producer resumes from). */
  get nextSeq(): number | undefined {
    return this.expected;
  }

  /** Judge `seq` without recording it (refusals later in the pipeline must not consume it). */
  judge(seq: number): SequenceVerdict {
    if (this.expected === undefined || seq === this.expected) return { kind: 'in_order' };
    if (seq > this.expected) return { kind: 'gap', missing: seq - this.expected };
    return this.gaps.some(([from, to]) => seq >= from && seq <= to) ? { kind: 'late' } : { kind: 'duplicate' };
  }

  /** Record that `seq` was accepted (call only after `judge` said in_order or gap). */
  accept(seq: number): void {
    if (this.expected !== undefined && seq > this.expected) {
      this.gaps.push([this.expected, seq - 1]);
      if (this.gaps.length > REMEMBERED_GAPS) this.gaps.shift();
    }
    this.expected = seq + 1;
  }
}
