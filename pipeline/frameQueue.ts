import type { QueueSettings } from './types.js';

/**
 * A bounded FIFO of frames waiting for their stream's solver, with the declared overflow policy:
 * - refuse_new: the arriving frame is refused;
 * - drop_oldest: the oldest waiting frame is dropped to make room;
 * - keep_latest: every waiting frame is dropped, only the arriving one waits (the solver skips
 *   ahead to the newest data).
 * The queue never drops silently: `offer` returns what it displaced so the caller can count and
 * announce it.
 */
export type OfferOutcome<T> =
  | { accepted: true; displaced: T[] }
  | { accepted: false };

export class FrameQueue<T> {
  private items: T[] = [];
  private head = 0;

  constructor(private readonly settings: QueueSettings) {}

  get length(): number {
    return this.items.length - this.head;
  }

  offer(item: T): OfferOutcome<T> {
    if (this.length < this.settings.capacity) {
      this.items.push(item);
      return { accepted: true, displaced: [] };
    }
    switch (this.settings.policy) {
      case 'refuse_new':
        return { accepted: false };
      case 'drop_oldest': {
        const oldest = this.shift() as T;
        this.items.push(item);
        return { accepted: true, displaced: [oldest] };
      }
      case 'keep_latest': {
        const displaced = this.takeAll();
        this.items.push(item);
        return { accepted: true, displaced };
      }
    }
  }

  /** The oldest waiting item, left in place. */
  peek(): T | undefined {
    return this.head < this.items.length ? this.items[this.head] : undefined;
  }

  shift(): T | undefined {
    if (this.head >= this.items.length) return undefined;
    const item = this.items[this.head];
    this.items[this.head] = undefined as T;
    this.head++;
    // Compact once the consumed prefix dominates, so the array stays proportional to capacity.
    if (this.head > 32 && this.head * 2 > this.items.length) {
      this.items = this.items.slice(this.head);
      this.head = 0;
    }
    return item;
  }

  /** Remove and return every waiting item, oldest first. */
  takeAll(): T[] {
    const all = this.items.slice(this.head);
    this.items = [];
    this.head = 0;
    return all;
  }
}
