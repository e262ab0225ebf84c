/** Timing pieces shared by the benchmark suites (a folder of its own, so the runner does not list it as a suite). */

/** The q-quantile (0..1) of the values, nearest rank; sorts a copy. */
export function quantile(values: number[], q: number): number {
  const s = [...values].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.floor(q * s.length))]!;
}

/** Microseconds per call of fn over a batch of calls. */
export function timeBatch(fn: () => void, batch: number): number {
  const start = process.hrtime.bigint();
  for (let i = 0; i < batch; i++) fn();
  return Number(process.hrtime.bigint() - start) / 1e3 / batch;
}
