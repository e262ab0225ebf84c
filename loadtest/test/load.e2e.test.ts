import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startChildDaemon, type ChildDaemon } from '../daemonProcess.js';
import { closeSession, openSession } from '../loadSession.js';
import { runStep } from '../loadStep.js';
import { REPORT_FILES, writeReport } from '../report.js';
import { runLoad, type LoadReport } from '../runLoad.js';
import { buildScenario, prepareScenario } from '../scenarios.js';

/**
 * The load test's own code path against a real daemon in a child process, at a tiny load:
 * it checks the accounting (every frame sent comes back solved, refused or dropped with a
 * notice, in three independent views) and the report files — never timing.
 */

const limits = { p99LimitMs: 1e9, lossLimit: 1, drainTimeoutMs: 30_000, otherCpuLimitPercent: 1e9 };

describe('a step that overflows queues on purpose', () => {
  let daemon: ChildDaemon;
  beforeAll(async () => {
    daemon = await startChildDaemon({ maxStreamsPerConnection: 8, workers: 1 });
  });
  afterAll(async () => {
    await daemon?.stop();
  });

  it('accounts for every frame: solved + refused + dropped with notice = sent, in every view', async () => {
    // Full-grid Gabor frames (16384 unknowns) sent 400 times a second per stream into queues of
    // one frame: no machine solves them that fast, so frames are refused (refuse_new) and
    // displaced (drop_oldest, keep_latest).
    const prepared = prepareScenario(buildScenario('large-gabor'), 'ltest.overflow');
    const policies = ['refuse_new', 'drop_oldest', 'keep_latest', 'refuse_new'] as const;
    prepared.streams.forEach((s, i) => (s.declaration = { ...s.declaration, queue: { capacity: 1, policy: policies[i]! } }));
    const session = await openSession(prepared, {
      connection: { url: daemon.url },
      streamsPerConnection: 2,
      slowPolicies: ['drop_with_notice'],
      slowBytesPerSecond: 64 * 1024,
      daemonPid: daemon.pid,
      declareTimeoutMs: 30_000,
    });
    try {
      expect(session.producers.connectionCount).toBe(2);
      const step = await runStep(session, { label: 'overflow', offeredFps: 1600, seconds: 1, settleSeconds: 0 }, limits);
      expect(step.drained).toBe(true);
      expect(step.failures).toEqual([]);
      expect(step.sent).toBe(1600);
      // The identity, from the timing subscriber's results and notices...
      expect(step.solved + step.refused + step.dropped).toBe(step.sent);
      expect(step.unaccounted).toBe(0);
      // ...from the producers' acks...
      expect(step.acked).toEqual({ solved: step.solved, dropped: step.dropped, unaccounted: 0 });
      // ...and from the daemon's own counters.
      expect(step.daemon_counters).toMatchObject({ received: step.sent, solved: step.solved, refused: step.refused, dropped: step.dropped });
      expect(step.refused).toBeGreaterThan(0);
      expect(step.refused_by_reason.queue_full).toBe(step.refused);
      expect(step.dropped).toBeGreaterThan(0);
      expect(step.solved).toBeGreaterThan(0);
      expect(step.latency_ms.count).toBe(step.solved - step.reference_missed_behind);
      // One solver time per timed result, as the daemon's workers reported it; a solve is part of the trip.
      expect(step.daemon_solve_ms.count).toBe(step.latency_ms.count);
      expect(step.daemon_solve_ms.p50).toBeGreaterThan(0);
      expect(step.daemon_solve_ms.p50).toBeLessThan(step.latency_ms.p50);
      expect(step.daemon?.rssMaxMb).toBeGreaterThan(0);
    } finally {
      await closeSession(session, false, 10_000);
    }
  });
});

describe('a whole run at a tiny fixed load', () => {
  let dir: string;
  let report: LoadReport;
  beforeAll(async () => {
    dir = mkdtempSync(path.join(tmpdir(), 'sparsewire-load-'));
    report = await runLoad({
      mode: 'quick',
      scenarios: ['small'],
      smallStreams: 3,
      target: null,
      workers: 1,
      streamsPerConnection: 2,
      slowPolicies: ['keep_latest'],
      slowBytesPerSecond: 32 * 1024,
      limits,
      search: { growth: 1.6, precision: 0.2, maxSteps: 4, maxAttempts: 1, quietWaitMs: 0, stepSeconds: 1, settleSeconds: 0.25 },
      warmupSeconds: 1,
      holdSeconds: 1,
      overloadFactor: 1.5,
      overloadSeconds: 1,
      fixedRates: { values: [15, 30], perStream: false },
      deadlineSeconds: 60,
      log: () => undefined,
    });
    writeReport(dir, report);
  });
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('runs the fixed loads after a warm-up and accounts for every frame', () => {
    expect(report.problems).toEqual([]);
    const [scenario] = report.scenarios;
    expect(scenario!.steps.map((s) => s.offered_fps)).toEqual([15, 30]);
    // Open loop: exactly rate × seconds frames per step.
    expect(scenario!.steps.map((s) => s.sent)).toEqual([15, 30]);
    expect(scenario!.accounting).toMatchObject({ unaccounted: 0, acked_unaccounted: 0, daemon_counter_mismatch: 0, ok: true });
    const a = scenario!.accounting;
    expect(a.sent).toBe(a.solved + a.refused + a.dropped);
    expect(a.sent).toBe(scenario!.warmup!.sent + 45);
    expect(report.accounting_ok).toBe(true);
    expect(report.figures.unaccounted_frames).toBe(0);
    expect(report.figures.rss_mb_3_streams).toBeGreaterThan(0);
    // The slow subscriber, once caught up, has every accepted frame as a result or inside a notice.
    const [slow] = scenario!.slow_subscribers;
    expect(slow).toMatchObject({ policy: 'keep_latest', accepted: a.solved + a.dropped, accounted: true, closed_by_daemon: [] });
    expect(slow!.results + slow!.missed_behind + slow!.missed_dropped).toBe(slow!.accepted);
  });

  it('writes the JSON, Markdown and SVG report', () => {
    const json = JSON.parse(readFileSync(path.join(dir, REPORT_FILES.json), 'utf8')) as LoadReport;
    expect(json.suite).toBe('loadtest');
    expect(json.machine.logical_cpus).toBeGreaterThan(0);
    expect(json.machine.node).toBe(process.version);
    expect(json.scenarios[0]!.steps).toHaveLength(2);
    const md = readFileSync(path.join(dir, REPORT_FILES.markdown), 'utf8');
    expect(md).toContain(`every one of the ${json.scenarios[0]!.accounting.sent} frames sent was solved, refused or dropped with a notice`);
    expect(md).toContain('| step | offered /s | solved /s |');
    expect(md).toContain('![latency percentiles against offered load](latency.svg)');
    const svg = readFileSync(path.join(dir, REPORT_FILES.plot), 'utf8');
    expect(svg.startsWith('<svg ')).toBe(true);
    expect(svg.trimEnd().endsWith('</svg>')).toBe(true);
    // Two timed steps, four percentiles each (the warm-up is not plotted).
    expect(svg.match(/<circle /g)).toHaveLength(8);
  });
});
