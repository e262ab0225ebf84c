/**
 * Supports: which entries of an estimate count as nonzero, the k largest entries, and how a
 * support moved between frames. Index buffers are preallocated by the caller; counts are returned.
 */

/**
 * Writes, in ascending order, the indices j with |x_j| > max(relThreshold · max|x|, floor) (and
 * x_j ≠ 0) into `out`; returns how many. The relative part makes the answer independent of
 * scale; the absolute floor lets a known noise level veto entries that noise alone explains.
 */
export function detectSupport(x: Float64Array, relThreshold: number, out: Int32Array, floor = 0): number {
  let peak = 0;
  for (let i = 0; i < x.length; i += 2) {
    const q = x[i]! * x[i]! + x[i + 1]! * x[i + 1]!;
    if (q > peak) peak = q;
  }
  if (peak === 0) return 0;
  const cut = Math.max(relThreshold * relThreshold * peak, floor * floor);
  let count = 0;
  for (let j = 0, i = 0; i < x.length; j++, i += 2) {
    const q = x[i]! * x[i]! + x[i + 1]! * x[i + 1]!;
    if (q > cut && q > 0) out[count++] = j;
  }
  return count;
}

/** Fills mag[j] = |x_j|² for every column j. */
export function squaredModuli(x: Float64Array, mag: Float64Array): void {
  for (let j = 0, i = 0; i < x.length; j++, i += 2) mag[j] = x[i]! * x[i]! + x[i + 1]! * x[i + 1]!;
}

/**
 * Puts the indices of the k largest entries of mag[0..n) into idx[0..k), sorted ascending.
 * Ties go to the lower index, so the choice is deterministic. idx must have room for n entries
 * (it is used as the selection's working array).
 */
export function selectLargest(mag: Float64Array, n: number, k: number, idx: Int32Array): void {
  for (let j = 0; j < n; j++) idx[j] = j;
  if (k <= 0) return;
  if (k < n) quickselect(mag, idx, 0, n - 1, k - 1);
  heapsortAscending(idx, Math.min(k, n));
}

/** True when entry a ranks before entry b: larger magnitude first, then lower index. */
function ranksBefore(mag: Float64Array, a: number, b: number): boolean {
  const ma = mag[a]!;
  const mb = mag[b]!;
  return ma > mb || (ma === mb && a < b);
}

/** Reorders idx[lo..hi] so that positions ≤ kth hold the kth+1 best-ranked entries. */
function quickselect(mag: Float64Array, idx: Int32Array, lo: number, hi: number, kth: number): void {
  while (hi > lo) {
    // Median of three as pivot keeps sorted or constant inputs from the quadratic case.
    const mid = (lo + hi) >> 1;
    if (ranksBefore(mag, idx[mid]!, idx[lo]!)) swap(idx, mid, lo);
    if (ranksBefore(mag, idx[hi]!, idx[lo]!)) swap(idx, hi, lo);
    if (ranksBefore(mag, idx[hi]!, idx[mid]!)) swap(idx, hi, mid);
    const pivot = idx[mid]!;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (ranksBefore(mag, idx[i]!, pivot)) i++;
      while (ranksBefore(mag, pivot, idx[j]!)) j--;
      if (i <= j) {
        swap(idx, i, j);
        i++;
        j--;
      }
    }
    if (kth <= j) hi = j;
    else if (kth >= i) lo = i;
    else return;
  }
}

function swap(a: Int32Array, i: number, j: number): void {
  const t = a[i]!;
  a[i] = a[j]!;
  a[j] = t;
}

/** In-place ascending heapsort of a[0..count). */
export function heapsortAscending(a: Int32Array, count: number): void {
  for (let start = (count >> 1) - 1; start >= 0; start--) siftDown(a, start, count);
  for (let end = count - 1; end > 0; end--) {
    swap(a, 0, end);
    siftDown(a, 0, end);
  }
}

function siftDown(a: Int32Array, root: number, count: number): void {
  for (;;) {
    let child = 2 * root + 1;
    if (child >= count) return;
    if (child + 1 < count && a[child + 1]! > a[child]!) child++;
    if (a[root]! >= a[child]!) return;
    swap(a, root, child);
    root = child;
  }
}

/**
 * Merges two ascending index lists a[0..na) and b[0..nb) into out (room for na + nb) without
 * duplicates; returns the count.
 */
export function unionSorted(a: Int32Array, na: number, b: Int32Array, nb: number, out: Int32Array): number {
  let i = 0;
  let j = 0;
  let k = 0;
  while (i < na || j < nb) {
    if (j >= nb || (i < na && a[i]! < b[j]!)) out[k++] = a[i++]!;
    else if (i >= na || b[j]! < a[i]!) out[k++] = b[j++]!;
    else {
      out[k++] = a[i++]!;
      j++;
    }
  }
  return k;
}

/** How many indices of `next` are not in `prev` (added) and of `prev` not in `next` (removed). */
export function supportChange(
  prev: Int32Array | undefined,
  next: Int32Array,
  nextCount = next.length,
): { added: number; removed: number } {
  if (prev === undefined) return { added: 0, removed: 0 };
  let i = 0;
  let j = 0;
  let added = 0;
  let removed = 0;
  while (i < prev.length || j < nextCount) {
    if (j >= nextCount || (i < prev.length && prev[i]! < next[j]!)) {
      removed++;
      i++;
    } else if (i >= prev.length || next[j]! < prev[i]!) {
      added++;
      j++;
    } else {
      i++;
      j++;
    }
  }
  return { added, removed };
}
