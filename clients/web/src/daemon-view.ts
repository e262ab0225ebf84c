/**
 * The daemon's own account of each stream (GET /v1/streams, docs/daemon.md): frames it dropped
 * or refused, its queue depth, whether a producer is connected. Results alone cannot tell the
 * page about frames that never became results, so the roster's "drops" come from here.
 */

export interface DaemonStreamView {
  /** Frames dropped by the queue policy plus frames refused, since the stream was declared. */
  drops: number;
  queueDepth: number;
  producerConnected: boolean;
}

const count = (v: unknown): number => (typeof v === 'number' && Number.isFinite(v) && v >= 0 ? v : 0);

/** Reads the /v1/streams body; entries it cannot read are left out. */
export function parseStreamsBody(body: unknown): Map<string, DaemonStreamView> {
  const out = new Map<string, DaemonStreamView>();
  const list = (body as { streams?: unknown } | null)?.streams;
  if (!Array.isArray(list)) return out;
  for (const entry of list) {
    if (entry === null || typeof entry !== 'object' || typeof (entry as { name?: unknown }).name !== 'string') continue;
    const e = entry as Record<string, unknown>;
    const frames = (e.frames ?? {}) as Record<string, unknown>;
    out.set(e.name as string, {
      drops: count(frames.dropped) + count(frames.refused),
      queueDepth: count(e.queue_depth),
      producerConnected: e.producer_connected === true,
    });
  }
  return out;
}

/** Polls the daemon's stream list every `everyMs` while the page is open. */
export function pollDaemonStreams(url: string, everyMs: number, onView: (view: Map<string, DaemonStreamView>) => void): () => void {
  let stopped = false;
  let timer: ReturnType<typeof setTimeout> | undefined;
  const poll = async () => {
    try {
      const response = await fetch(url, { cache: 'no-store' });
      if (response.ok) onView(parseStreamsBody(await response.json()));
    } catch {
      // Unreachable daemon: the watch link already says so; try again on the next tick.
    }
    if (!stopped) timer = setTimeout(poll, everyMs);
  };
  void poll();
  return () => {
    stopped = true;
    clearTimeout(timer);
  };
}
