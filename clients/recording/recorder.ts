import type { AlertMessage, FrameMessage, MissedMessage, ResultMessage, StreamDeclaration, StreamEventMessage } from '../../protocol/index.js';
import type { Subscriber } from '../subscriber.js';
import type { RecordedMessage } from './types.js';
import { RecordingWriter, type FsyncPolicy } from './writer.js';

export interface RecorderCounts {
  frames: number;
  results: number;
  alerts: number;
  missed: number;
  streamEvents: number;
}

/**
 * Records what a subscriber receives into a recording file. The subscription should want
 * `measurements` (so each result brings its frame's y: recorded as a `frame` record, then the
 * result without it) and `coefficients` (so `replay --check` has something to compare).
 * Messages that arrive before `start` are held and written first.
 */
export class SessionRecorder {
  #writer: RecordingWriter | null = null;
  #stopped = false;
  readonly #held: Array<{ message: RecordedMessage; at: number }> = [];
  readonly counts: RecorderCounts = { frames: 0, results: 0, alerts: 0, missed: 0, streamEvents: 0 };

  constructor(subscriber: Subscriber) {
    subscriber.on('result', (r) => this.#result(r.raw));
    subscriber.on('alert', (a: AlertMessage) => this.#put(a, 'alerts'));
    subscriber.on('missed', (m: MissedMessage) => this.#put(m, 'missed'));
    subscriber.on('streamEvent', (e: StreamEventMessage) => this.#put(e, 'streamEvents'));
  }

  /** Opens the file with the declarations known now, and writes what was held. */
  start(path: string, header: { source: string; note?: string; streams: StreamDeclaration[] }, fsync: Partial<FsyncPolicy> = {}): void {
    this.#writer = new RecordingWriter(path, { created_at: Date.now(), ...header }, fsync);
    for (const { message, at } of this.#held.splice(0)) this.#writer.append(message, at);
  }

  /** Bytes written so far. */
  get bytes(): number {
    return this.#writer?.bytes ?? 0;
  }

  /** Takes no more messages (what arrives from now on is not recorded). */
  stop(): void {
    this.#stopped = true;
  }

  /** Syncs and closes the file. */
  close(): void {
    this.#writer?.close();
  }

  #result(msg: ResultMessage): void {
    const { y, sigma, ...result } = msg;
    if (y) {
      const frame: FrameMessage = { v: 1, type: 'frame', stream: msg.stream, seq: msg.seq, time: msg.time, y, ...(sigma !== undefined ? { sigma } : {}) };
      this.#put(frame, 'frames');
    }
    this.#put(result, 'results');
  }

  #put(message: RecordedMessage, counter: keyof RecorderCounts): void {
    if (this.#stopped) return;
    this.counts[counter]++;
    const at = Date.now();
    if (this.#writer) this.#writer.append(message, at);
    else this.#held.push({ message, at });
  }
}
