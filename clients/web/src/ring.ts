/**
 * Fixed-capacity time series for trend charts: one time column and a few value columns,
 * overwritten oldest-first. Pushing allocates nothing; `copyWindow` writes the samples newer
 * than a cut-off, oldest first, into caller-owned arrays (what a chart wants).
 */
export class TrendRing {
  readonly capacity: number;
  private readonly times: Float64Array;
  private readonly columns: Float64Array[];
  private next = 0;
  private filled = 0;

  constructor(capacity: number, columnCount: number) {
    if (!Number.isInteger(capacity) || capacity < 1) throw new RangeError(`capacity must be a positive integer, got ${capacity}`);
    this.capacity = capacity;
    this.times = new Float64Array(capacity);
    this.columns = Array.from({ length: columnCount }, () => new Float64Array(capacity));
  }

  get size(): number {
    return this.filled;
  }

  /** Appends one sample; `values` holds one number per column (NaN for "no value"). */
  push(time: number, values: ArrayLike<number>): void {
    const at = this.next;
    this.times[at] = time;
    for (let c = 0; c < this.columns.length; c++) this.columns[c]![at] = values[c] ?? Number.NaN;
    this.next = (at + 1) % this.capacity;
    if (this.filled < this.capacity) this.filled++;
  }

  clear(): void {
    this.next = 0;
    this.filled = 0;
  }

  /**
   * Copies samples with time ≥ since, oldest first, into `times` and `columns`
   * (each at least `capacity` long). Returns how many were written.
   */
  copyWindow(since: number, times: Float64Array, columns: Float64Array[]): number {
    const start = (this.next - this.filled + this.capacity) % this.capacity;
    let written = 0;
    for (let i = 0; i < this.filled; i++) {
      const at = (start + i) % this.capacity;
      if (this.times[at]! < since) continue;
      times[written] = this.times[at]!;
      for (let c = 0; c < this.columns.length; c++) columns[c]![written] = this.columns[c]![at]!;
      written++;
    }
    return written;
  }
}
