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
  /** Subscriber connections it closed, by reason (its `reason` label: no_pong, hard_cap, fell_behind, …). */
  watchClosures: Record<string, number>;
  /** Its own receipt-to-publication latency histogram: cumulative count per bucket bound `le` (seconds). */
  latencyBuckets: Record<string, number>;
}

type CounterName = Exclude<keyof DaemonCounters, 'watchClosures' | 'latencyBuckets'>;

const LATENCY_BUCKETS = 'sparsewire_frame_latency_seconds_bucket';

const NAMES: Record<CounterName, string> = {
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

/** Values of one metric's samples whose labels include `where`, keyed by the value of label `by`. */
export function samplesByLabel(text: string, metric: string, by: string, where: Record<string, string> = {}): Record<string, number> {
  const out: Record<string, number> = {};
  for (const line of text.split('\n')) {
    const match = /^([a-zA-Z_:][a-zA-Z0-9_:]*)\{(.*)\}\s+(\S+)/.exec(line);
    if (!match || match[1] !== metric) continue;
    const labels = Object.fromEntries([...match[2]!.matchAll(/([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\]|\\.)*)"/g)].map((m) => [m[1]!, m[2]!]));
    if (Object.entries(where).some(([k, v]) => labels[k] !== v) || labels[by] === undefined) continue;
    out[labels[by]!] = (out[labels[by]!] ?? 0) + Number(match[3]);
  }
  return out;
}

export function countersFromText(text: string): DaemonCounters {
  const sums = sumSamples(text);
  const out = {
    watchClosures: samplesByLabel(text, NAMES.connectionsClosed, 'reason', { endpoint: 'watch' }),
    latencyBuckets: samplesByLabel(text, LATENCY_BUCKETS, 'le'),
  } as DaemonCounters;
  for (const key of Object.keys(NAMES) as CounterName[]) out[key] = sums.get(NAMES[key]) ?? 0;
  return out;
}

export async function readDaemonCounters(baseUrl: string, token?: string): Promise<DaemonCounters> {
  const url = new URL('/v1/metrics', baseUrl.replace(/^ws/, 'http'));
  const res = await fetch(url, { headers: token ? { authorization: `Bearer ${token}` } : {}, signal: AbortSignal.timeout(5000) });
  if (!res.ok) throw new Error(`GET ${url.pathname} answered HTTP ${res.status}`);
  return countersFromText(await res.text());
}

export function counterDelta(after: DaemonCounters, before: DaemonCounters): DaemonCounters {
  const out = {
    watchClosures: recordDelta(after.watchClosures, before.watchClosures, false),
    latencyBuckets: recordDelta(after.latencyBuckets, before.latencyBuckets, true),
  } as DaemonCounters;
  for (const key of Object.keys(NAMES) as CounterName[]) out[key] = after[key] - before[key];
  return out;
}

function recordDelta(after: Record<string, number>, before: Record<string, number>, keepZeros: boolean): Record<string, number> {
  const out: Record<string, number> = {};
  for (const [key, n] of Object.entries(after)) {
    const d = n - (before[key] ?? 0);
    if (d > 0 || keepZeros) out[key] = d;
  }
  return out;
}

/**
 * The bucket bound (in ms) at or below which a fraction `q` of the observations fall: an upper
 * bound of the q-quantile, as precise as the buckets (Prometheus histograms are cumulative per `le`).
 * Undefined when the histogram is empty or the quantile lies in the +Inf bucket.
 */
export function bucketQuantileMs(buckets: Record<string, number>, q: number): number | undefined {
  const bounds = Object.entries(buckets)
    .map(([le, count]) => ({ le: le === '+Inf' ? Number.POSITIVE_INFINITY : Number(le), count }))
    .filter((b) => !Number.isNaN(b.le))
    .sort((a, b) => a.le - b.le);
  const total = bounds.at(-1)?.count ?? 0;
  if (total <= 0) return undefined;
  const hit = bounds.find((b) => b.count >= q * total);
  return hit && Number.isFinite(hit.le) ? hit.le * 1000 : undefined;
}
