/** Reconnect delays: exponential growth from `initialMs` to `maxMs`, with ± `jitter` spread. */
export interface BackoffSettings {
  initialMs: number;
  maxMs: number;
  factor: number;
  /** Relative spread, 0..1, so that many clients do not reconnect in lockstep. */
  jitter: number;
}

export const DEFAULT_BACKOFF: BackoffSettings = { initialMs: 100, maxMs: 5000, factor: 2, jitter: 0.2 };

export class Backoff {
  #attempt = 0;
  constructor(
    private readonly settings: BackoffSettings = DEFAULT_BACKOFF,
    private readonly random: () => number = Math.random,
  ) {}

  /** The delay before the next attempt; each call moves one step further. */
  next(): number {
    const { initialMs, maxMs, factor, jitter } = this.settings;
    const base = Math.min(maxMs, initialMs * factor ** this.#attempt);
    this.#attempt++;
    return Math.max(0, base * (1 + jitter * (2 * this.random() - 1)));
  }

  reset(): void {
    this.#attempt = 0;
  }
}
