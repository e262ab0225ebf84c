import { expect } from 'vitest';
import type { TestClient } from '../../daemon/test/helpers.js';

/** Seqs of `stream` a watcher has seen come out: as results or inside `missed` ranges. */
export function covered(watcher: TestClient, stream: string): Set<number> {
  const seen = new Set<number>();
  for (const r of watcher.ofType('result')) if (r.stream === stream) seen.add(r.seq);
  for (const m of watcher.ofType('missed')) if (m.stream === stream) for (let q = m.from_seq; q <= m.to_seq; q++) seen.add(q);
  return seen;
}

/**
 * The cluster's promise per stream (docs/cluster.md): results strictly in sequence order, and
 * every accepted frame out exactly once — a result or inside one `missed` notice.
 */
export function expectOnceInOrder(watcher: TestClient, stream: string, accepted: number[]): void {
  const seqs = watcher.ofType('result').filter((r) => r.stream === stream).map((r) => r.seq);
  expect(seqs, `${stream}: results in order, none twice`).toEqual([...seqs].sort((a, b) => a - b).filter((q, i, a) => i === 0 || q !== a[i - 1]));
  const missed = watcher.ofType('missed').filter((m) => m.stream === stream);
  for (const t of accepted) {
    const times = seqs.filter((q) => q === t).length + missed.filter((m) => m.from_seq <= t && t <= m.to_seq).length;
    expect(times, `${stream}#${t} solved once or reported once`).toBe(1);
  }
}
