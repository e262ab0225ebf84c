import * as hdr from 'hdr-histogram-js';

/**
 * Latency distribution kept in an HdrHistogram (hdr-histogram-js): integer microseconds, three
 * significant digits, so every percentile is exact to 0.1 % of its value whatever the range.
 */
export interface LatencySummary {
  count: number;
  mean: number;
  p50: number;
  p90: number;
  p99: number;
  p999: number;
  max: number;
}

/** Percentiles reported everywhere (report table, plot), in percent. */
export const PERCENTILES = [
  { key: 'p50', percentile: 50 },
  { key: 'p90', percentile: 90 },
  { key: 'p99', percentile: 99 },
  { key: 'p999', percentile: 99.9 },
] as const;

export class LatencyRecorder {
  readonly #histogram = hdr.build({
    bitBucketSize: 32,
    autoResize: true,
    lowestDiscernibleValue: 1,
    numberOfSignificantValueDigits: 3,
    useWebAssembly: false,
  });

  /** Records one latency in milliseconds (stored as whole microseconds, at least 1). */
  record(ms: number): void {
    this.#histogram.recordValue(Math.max(1, Math.round(ms * 1000)));
  }

  get count(): number {
    return this.#histogram.totalCount;
  }

  /** All values in milliseconds; zeros when nothing was recorded. */
  summary(): LatencySummary {
    const h = this.#histogram;
    const at = (p: number) => (h.totalCount === 0 ? 0 : h.getValueAtPercentile(p) / 1000);
    return {
      count: h.totalCount,
      mean: h.totalCount === 0 ? 0 : h.mean / 1000,
      p50: at(50),
      p90: at(90),
      p99: at(99),
      p999: at(99.9),
      max: h.totalCount === 0 ? 0 : h.maxValue / 1000,
    };
  }
}
