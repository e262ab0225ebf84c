import { pause } from '../pause.js';
import type { ProducerStream } from '../producer.js';
import type { Feed } from './synthetic.js';

export interface FeedRunOptions {
  /** Frames per second; 0 = as fast as the daemon's credits allow. Default: the feed's own rate. */
  rate?: number;
  /** Stop after this many frames. */
  frames?: number;
  signal?: AbortSignal;
  /** Called after each frame is handed to the connection, with its seq. */
  onFrame?: (seq: number) => void;
}

/**
 * Drives a feed into a declared stream at a steady rate. Each frame waits for the previous one to
 * be written (so when credits run out the feed slows down instead of piling frames up); a feed
 * that fell behind its schedule continues from now rather than bursting to catch up.
 * Resolves with the number of frames sent.
 */
export async function runFeed(feed: Feed, stream: ProducerStream, options: FeedRunOptions = {}): Promise<number> {
  const rate = options.rate ?? feed.framesPerSecond;
  const interval = rate > 0 ? 1000 / rate : 0;
  let due = performance.now();
  let sent = 0;
  while (!options.signal?.aborted && (options.frames === undefined || sent < options.frames)) {
    const seq = stream.nextSeq;
    await stream.send(feed.next(), { time: Date.now() });
    sent++;
    options.onFrame?.(seq);
    if (interval > 0) {
      due += interval;
      const wait = due - performance.now();
      if (wait > 0) await pause(wait, options.signal);
      else due = performance.now();
    }
  }
  return sent;
}
