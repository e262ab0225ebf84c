import { counterDelta, type DaemonCounters } from './daemonCounters.js';
import type { LoadSession } from './loadStep.js';

/**
 * The accounting of a whole scenario, after its last step has drained: every frame sent is
 * solved, refused or dropped with a notice, seen three ways — the timing subscriber's results and
 * notices, the producers' acks, the daemon's own counters — and every slow subscriber's share.
 */

/** sent = solved + refused + dropped, checked three ways over a whole scenario. */
export interface ScenarioAccounting {
  sent: number;
  solved: number;
  refused: number;
  dropped: number;
  /** From the reference subscriber's results and notices: sent − solved − refused − dropped. */
  unaccounted: number;
  /** From the producers' acks. */
  acked_unaccounted: number;
  /** The daemon's own counters against ours (null when its metrics could not be read). */
  daemon_counters: DaemonCounters | null;
  /** Sum of |differences| between the daemon's counters and ours (0 when they agree or were not read). */
  daemon_counter_mismatch: number;
  ok: boolean;
}

/**
 * What a slow subscriber got over a scenario. Every accepted frame should reach it as a result or
 * inside a `missed` notice once it has caught up (`accounted`), unless the daemon closed it.
 */
export interface SlowSubscriberTotals {
  policy: string;
  results: number;
  missed_behind: number;
  missed_dropped: number;
  /** Frames the daemon accepted (solved + dropped) during the scenario. */
  accepted: number;
  /** Every accepted frame reached it (only meaningful when it was never closed). */
  accounted: boolean;
  /** Not yet accounted but still reading when the wait ended (its backlog outlasted SLOW_CATCH_UP_MS). */
  still_reading: boolean;
  /** Closures by the daemon as the subscriber saw them ("code reason"), each followed by a reconnect. */
  closed_by_daemon: string[];
}

/**
 * At the end of a scenario the slow subscribers are given time to catch up: a reader at a few
 * hundred KiB/s may have megabytes waiting in the socket buffers. The wait lasts while one of them
 * is still short of frames and still reading (its byte count grew within STALL_MS), at most 60 s
 * (15 s in a quick run, which must stay under two minutes).
 */
export function slowCatchUpMs(mode: 'quick' | 'full'): number {
  return mode === 'quick' ? 15_000 : 60_000;
}
const STALL_MS = 3000;

export async function slowTotals(session: LoadSession, accepted: number, waitMs: number): Promise<SlowSubscriberTotals[]> {
  const seen = (x: LoadSession['slow'][number]) => x.counts.results + x.counts.missedBehind + x.counts.missedDropped;
  const short = (x: LoadSession['slow'][number]) => x.closedByDaemon.length === 0 && seen(x) < accepted;
  const deadline = performance.now() + waitMs;
  const progress = session.slow.map((x) => ({ bytes: x.counts.bytes, at: performance.now() }));
  const reading = (i: number) => performance.now() - progress[i]!.at < STALL_MS;
  while (performance.now() < deadline && session.slow.some((x, i) => short(x) && reading(i))) {
    await new Promise((r) => setTimeout(r, 50));
    session.slow.forEach((x, i) => {
      if (x.counts.bytes !== progress[i]!.bytes) progress[i] = { bytes: x.counts.bytes, at: performance.now() };
    });
  }
  return session.slow.map((x, i) => ({
    policy: x.policy,
    results: x.counts.results,
    missed_behind: x.counts.missedBehind,
    missed_dropped: x.counts.missedDropped,
    accepted,
    accounted: x.closedByDaemon.length === 0 && seen(x) === accepted,
    still_reading: short(x) && reading(i),
    closed_by_daemon: x.closedByDaemon.map((c) => `${c.code}${c.reason ? ` ${c.reason}` : ''}`),
  }));
}

/** The scenario's accounting from the session's cumulative counts and the daemon's counters before and after. */
export function finalAccounting(session: LoadSession, before: DaemonCounters | undefined, after: DaemonCounters | undefined, ownDaemon: boolean): ScenarioAccounting {
  const p = session.producers.counts;
  const r = session.reference.counts;
  const solved = r.results + r.missedBehind;
  const dropped = r.missedDropped;
  const counters = before && after ? counterDelta(after, before) : null;
  // Against a daemon we did not start, other clients may move its counters: compare only our own.
  const mismatch = counters && ownDaemon
    ? Math.abs(counters.received - p.sent) + Math.abs(counters.solved - solved) + Math.abs(counters.refused - p.refused) + Math.abs(counters.dropped - dropped)
    : 0;
  const unaccounted = p.sent - solved - p.refused - dropped;
  const ackedUnaccounted = p.sent - p.refused - p.ackedSolved - p.ackedDropped;
  return {
    sent: p.sent,
    solved,
    refused: p.refused,
    dropped,
    unaccounted,
    acked_unaccounted: ackedUnaccounted,
    daemon_counters: counters,
    daemon_counter_mismatch: mismatch,
    ok: unaccounted === 0 && ackedUnaccounted === 0 && mismatch === 0 && p.ackedDropped === dropped,
  };
}
