/**
 * The daemon's own frame counters, read from GET /v1/metrics (Prometheus text exposition format
 * 0.0.4: one `name{labels} value` sample per line, `#` lines are comments). Used as a third,
 * independent view in the accounting check.
 */
export interface DaemonCounters {
  received: number;
  solved: number;
  refused: number;
  dropped: number;
  /** Results subscribers did not get because they fell behind. */
  resultsMissed: number;
  /** Connections the daemon closed on its own (slow subscribers, dead peers). */
  connectionsClosed: number;
}

const NAMES: Record<keyof DaemonCounters, string> = {
  received: 'sparsewire_frames_received_total',
  solved: 'sparsewire_frames_solved_total',
  refused: 'sparsewire_frames_refused_total',
  dropped: 'sparsewire_frames_dropped_total',
  resultsMissed: 'sparsewire_results_missed_total',
  connectionsClosed: 'sparsewire_connections_closed_total',
};

/** Sums every sample of each metric over its labels. */
export function sumSamples(text: string): Map<string, number> {
  const sums = new Map<string, number>();
  for (const line of text.split('\n')) {
    if (line === '' || line.startsWith('#')) continue;
    const match = /^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{.*\})?\s+(\S+)/.exec(line);
    if (!match) continue;
    const value = Number(match[3]);
    if (!Number.isFinite(value)) continue;
    sums.set(match[1]!, (sums.get(match[1]!) ?? 0) + value);
  }
  return sums;
}

export function countersFromText(text: string): DaemonCounters {
  const sums = sumSamples(text);
  const out = {} as DaemonCounters;
  for (const key of Object.keys(NAMES) as Array<keyof DaemonCounters>) out[key] = sums.get(NAMES[key]) ?? 0;
  return out;
}

export async function readDaemonCounters(baseUrl: string, token?: string): Promise<DaemonCounters> {
  const url = new URL('/v1/metrics', baseUrl.replace(/^ws/, 'http'));
  const res = await fetch(url, { headers: token ? { authorization: `Bearer ${token}` } : {}, signal: AbortSignal.timeout(5000) });
  if (!res.ok) throw new Error(`GET ${url.pathname} answered HTTP ${res.status}`);
  return countersFromText(await res.text());
}

export function counterDelta(after: DaemonCounters, before: DaemonCounters): DaemonCounters {
  const out = {} as DaemonCounters;
  for (const key of Object.keys(NAMES) as Array<keyof DaemonCounters>) out[key] = after[key] - before[key];
  return out;
}
