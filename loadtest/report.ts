import { mkdirSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { slowCatchUpMs } from './accounting.js';
import { WARMUP_LABEL, type StepResult } from './loadStep.js';
import type { LoadReport, ScenarioReport } from './runLoad.js';
import { latencyPlotSvg, type PlotPanel } from './svgPlot.js';

/** Targets the issue sets for the headline figures (shown beside them in the report). */
export const TARGETS: Record<string, string> = {
  p99_over_median_solve_at_70pct: '≤ 3',
  rss_mb_1000_streams: '≤ 1024',
  unaccounted_frames: '= 0',
};

export const REPORT_FILES = { json: 'report.json', markdown: 'report.md', plot: 'latency.svg' } as const;

/** Writes report.json, report.md and latency.svg into `dir` (created if needed); returns their paths. */
export function writeReport(dir: string, report: LoadReport): string[] {
  mkdirSync(dir, { recursive: true });
  const files = [
    [REPORT_FILES.json, `${JSON.stringify(report, null, 2)}\n`],
    [REPORT_FILES.markdown, reportMarkdown(report)],
    [REPORT_FILES.plot, reportPlot(report)],
  ] as const;
  return files.map(([name, text]) => {
    const file = path.join(dir, name);
    writeFileSync(file, text);
    return file;
  });
}

export function reportPlot(report: LoadReport): string {
  const panels: PlotPanel[] = report.scenarios.map((s) => ({
    title: `${s.name}: ${s.summary}`,
    points: plottedSteps(s).map((st) => ({
      offeredFps: st.offered_fps,
      p50: st.latency_ms.p50,
      p90: st.latency_ms.p90,
      p99: st.latency_ms.p99,
      p999: st.latency_ms.p999,
      pass: st.pass,
    })),
    saturationFps: s.saturation_fps,
    p99LimitMs: Number(report.settings.p99_limit_ms),
  }));
  return latencyPlotSvg(
    panels,
    `Latency from each frame's scheduled send time to its result at a subscriber, by offered load, for ${report.scenarios.map((s) => s.name).join(', ')}; ` +
      `measured ${report.started_at} on ${report.machine.logical_cpus} logical CPUs (${report.machine.cpu_model}), Node ${report.machine.node}.`,
  );
}

/** Steps that carry a timed load (the warm-up is not one of them). */
function plottedSteps(s: ScenarioReport): StepResult[] {
  return [...s.steps, ...(s.at_70pct ? [s.at_70pct] : []), ...(s.overload ? [s.overload] : [])].filter((st) => st.latency_ms.count > 0);
}

/** "a 2×, b" from ["a", "b", "a"]. */
function countedList(items: string[]): string {
  const counts = new Map<string, number>();
  for (const item of items) counts.set(item, (counts.get(item) ?? 0) + 1);
  return [...counts].map(([item, n]) => (n > 1 ? `${item} ${n}×` : item)).join(', ');
}

export function markdownTable(headers: string[], rows: Array<Array<string | number>>): string {
  const line = (cells: Array<string | number>) => `| ${cells.map((c) => String(c).replace(/\|/g, '\\|')).join(' | ')} |`;
  return [line(headers), line(headers.map(() => '---')), ...rows.map(line)].join('\n');
}

const f1 = (v: number) => v.toFixed(1);
const f2 = (v: number) => v.toFixed(2);
const f0 = (v: number) => v.toFixed(0);
const mb = (v: number | null | undefined) => (v === null || v === undefined ? '–' : f0(v));
const bound = (ms: number | null) => (ms === null ? '∞' : ms < 10 ? String(+ms.toFixed(1)) : f0(ms));

function stepRow(s: StepResult): Array<string | number> {
  return [
    s.label,
    f0(s.offered_fps),
    f0(s.throughput_fps),
    f1(s.latency_ms.p50),
    f1(s.latency_ms.p90),
    f1(s.latency_ms.p99),
    f1(s.latency_ms.p999),
    f1(s.latency_ms.max),
    s.daemon_latency_ms ? `≤ ${bound(s.daemon_latency_ms.p50_at_most)} / ≤ ${bound(s.daemon_latency_ms.p99_at_most)}` : '–',
    s.daemon_solve_ms.count > 0 ? `${f2(s.daemon_solve_ms.p50)} / ${f2(s.daemon_solve_ms.p99)}` : '–',
    (100 * s.loss_fraction).toFixed(2),
    s.refused,
    s.dropped,
    s.daemon ? f0(s.daemon.cpuPercent) : '–',
    mb(s.daemon?.rssMaxMb),
    f0(s.generator_cpu_percent),
    s.other_cpu_percent === null ? '–' : f0(s.other_cpu_percent),
    f1(s.send_lag_ms.p99),
    `${s.alerts} / ${s.missed_notices}`,
    s.label === WARMUP_LABEL ? 'not judged' : s.pass ? 'pass' : `fail: ${s.reasons.join('; ')}`,
  ];
}

const STEP_HEADERS = [
  'step', 'offered /s', 'solved /s', 'p50 ms', 'p90 ms', 'p99 ms', 'p99.9 ms', 'max ms', 'in daemon p50 / p99 ms', 'solve in daemon p50 / p99 ms', 'loss %', 'refused', 'dropped',
  'daemon CPU %', 'daemon RSS MiB', 'generator CPU %', 'other programs CPU %', 'send lag p99 ms', 'alerts / missed notices', 'verdict',
];

function scenarioMarkdown(s: ScenarioReport, mode: LoadReport['mode']): string {
  const out: string[] = [];
  out.push(`## Scenario \`${s.name}\`: ${s.summary}`, '');
  out.push(
    markdownTable(
      ['group', 'streams', 'share of frames', 'bare solve median ms', 'bare solve p90 ms', 'what'],
      s.groups.map((g) => [g.label, g.streams, `${(100 * g.share_of_frames).toFixed(1)} %`, g.bare_solve_median_ms.toFixed(3), g.bare_solve_p90_ms.toFixed(3), g.description]),
    ),
    '',
  );
  out.push(
    `Daemon: ${s.daemon.kind === 'started' ? `started for this scenario, ${s.daemon.workers} solver workers` : `existing daemon at ${s.daemon.url}`}` +
      `${s.daemon.measured ? '' : ' (CPU and memory not measured: not a local process we can read)'}. ` +
      `${s.streams} streams over ${s.producer_connections} producer connections, declared in ${s.declare_seconds.toFixed(1)} s. ` +
      `Median bare solve of the scenario's frames: ${s.median_bare_solve_ms.toFixed(3)} ms.`,
    '',
  );
  const steps = [...(s.warmup ? [s.warmup] : []), ...s.steps, ...(s.at_70pct ? [s.at_70pct] : []), ...(s.overload ? [s.overload] : [])];
  out.push(markdownTable(STEP_HEADERS, steps.map(stepRow)), '');
  out.push(
    `Saturation: **${s.saturation_fps === null ? 'not searched' : `${f0(s.saturation_fps)} frames/s`}**` +
      `${s.first_failing_fps !== null ? ` (lowest failing load ${f0(s.first_failing_fps)} frames/s)` : ''}. ` +
      `At 70 %: ${s.at_70pct ? `p99 ${f1(s.at_70pct.latency_ms.p99)} ms = **${s.p99_over_median_solve_at_70pct!.toFixed(1)} ×** the median bare solve${s.p99_over_median_daemon_solve_at_70pct !== null ? ` (${s.p99_over_median_daemon_solve_at_70pct.toFixed(1)} × the median solve in the daemon meanwhile, ${f2(s.at_70pct.daemon_solve_ms.p50)} ms)` : ''}` : 'not run'}. ` +
      `Daemon peak resident memory: ${s.daemon_peak_rss_mb === null ? 'not measured' : `**${f0(s.daemon_peak_rss_mb)} MiB**`}.`,
    '',
  );
  const a = s.accounting;
  out.push(
    `Accounting over the scenario: sent ${a.sent} = solved ${a.solved} + refused ${a.refused} + dropped with notice ${a.dropped}` +
      ` → unaccounted **${a.unaccounted}**; by the producers' acks: **${a.acked_unaccounted}**` +
      `${a.daemon_counters ? `; daemon counters received ${a.daemon_counters.received}, solved ${a.daemon_counters.solved}, refused ${a.daemon_counters.refused}, dropped ${a.daemon_counters.dropped} (mismatch ${a.daemon_counter_mismatch})` : ''}` +
      ` — ${a.ok ? 'every frame accounted for' : '**ACCOUNTING FAILED**'}.`,
    '',
  );
  const refusals = steps.flatMap((st) => Object.entries(st.refused_by_reason));
  if (refusals.length > 0) {
    const totals = new Map<string, number>();
    for (const [reason, n] of refusals) totals.set(reason, (totals.get(reason) ?? 0) + n);
    out.push(`Refusals by reason: ${[...totals].map(([r, n]) => `${r} ${n}`).join(', ')}.`, '');
  }
  if (steps.some((st) => st.slow_subscribers.length > 0)) {
    out.push(
      'Slow subscribers (heavy results, reading at a fixed byte rate) beside the timing subscriber:',
      '',
      markdownTable(
        ['step', ...steps[0]!.slow_subscribers.map((x, i) => `slow ${i + 1} (${x.policy}): got / missed while behind`)],
        steps.map((st) => [st.label, ...st.slow_subscribers.map((x) => `${x.results} / ${x.missed_behind}${x.closed_by_daemon > 0 ? ` (closed ${x.closed_by_daemon}×)` : ''}`)]),
      ),
      '',
    );
  }
  if (s.slow_subscribers.length > 0) {
    out.push(
      `Each slow subscriber over the whole scenario (after waiting, while it was still reading, up to ${slowCatchUpMs(mode) / 1000} s for it to catch up): of the ${s.slow_subscribers[0]!.accepted} frames the daemon accepted, ` +
        'how many arrived as results and how many were announced as missed:',
      '',
      markdownTable(
        ['slow subscriber', 'results', 'missed while behind', 'dropped upstream', 'all accounted for', 'closed by the daemon'],
        s.slow_subscribers.map((x, i) => [
          `${i + 1} (${x.policy})`,
          x.results,
          x.missed_behind,
          x.missed_dropped,
          x.closed_by_daemon.length > 0 ? '– (was closed)' : x.accounted ? 'yes' : x.still_reading ? '– (still reading its backlog)' : '**no**',
          x.closed_by_daemon.length > 0 ? `${x.closed_by_daemon.length}× (${countedList(x.closed_by_daemon)}), reconnected` : 'no',
        ]),
      ),
      '',
    );
  }
  const closures = a.daemon_counters ? Object.entries(a.daemon_counters.watchClosures) : [];
  if (closures.length > 0) {
    out.push(
      `The daemon closed subscriber connections (its reasons): ${closures.map(([r, n]) => `${r} ${n}`).join(', ')}. ` +
        '`no_pong`: the answer to a ping was overdue even allowing for the backlog ahead of it (docs/daemon.md, "Dead peers"); ' +
        '`hard_cap`, `fell_behind`, `too_many_notices`: the outbox limits and the subscriber\'s when_behind policy.',
      '',
    );
  }
  if (s.problems.length > 0) out.push('Problems:', '', ...s.problems.map((p) => `- ${p}`), '');
  return out.join('\n');
}

export function reportMarkdown(report: LoadReport): string {
  const m = report.machine;
  const st = report.settings;
  const sent = report.scenarios.reduce((n, s) => n + s.accounting.sent, 0);
  const out: string[] = [];
  out.push(`# sparsewire load test: ${report.mode} run, ${report.started_at.slice(0, 10)}`, '');
  out.push(
    report.accounting_ok
      ? `**Accounting: every one of the ${sent} frames sent was solved, refused or dropped with a notice.**`
      : `**ACCOUNTING FAILED: ${report.figures.unaccounted_frames ?? '?'} frames not accounted for (or a scenario did not finish); see below.**`,
    '',
  );
  out.push('## Headline figures', '');
  out.push(markdownTable(['figure', 'value', 'target'], Object.entries(report.figures).map(([k, v]) => [`\`${k}\``, v, TARGETS[k] ?? ''])));
  out.push('', '![latency percentiles against offered load](latency.svg)', '');
  out.push('## Machine', '');
  out.push(
    `- CPU: ${m.cpu_model}, ${m.logical_cpus} logical CPUs (available parallelism ${m.available_parallelism}); memory ${m.memory_gib} GiB`,
    `- OS: ${m.os} (${m.arch}); Node ${m.node}`,
    `- Load average (1, 5, 15 min): ${m.load_average_start.join(', ')} at the start, ${m.load_average_end?.join(', ') ?? '?'} at the end`,
    `- Run: ${report.started_at} to ${report.finished_at} (${report.duration_s.toFixed(0)} s)`,
    '- The load generator, the daemon (main thread and solver workers) and anything else running share these cores: ' +
      'a load average above the core count means other work competed with the measurement.',
    '',
  );
  out.push('## Method', '');
  out.push(
    `- Producers send like sensor front ends: each stream on a fixed schedule (streams of a group staggered evenly), without waiting for credit, so a full queue meets the stream's declared policy. ` +
      `Streams share ${st.streams_per_connection} per WebSocket connection.`,
    "- Latency is measured from each frame's *scheduled* send time to the arrival of its result at a timing subscriber (quality only, drop_with_notice), so a late sender or a stalled daemon cannot hide its delay; " +
      'percentiles come from an HdrHistogram (hdr-histogram-js, microseconds, 3 significant digits). Frames scheduled in the first ' +
      `${(st.search as { settleSeconds: number }).settleSeconds} s of a step are sent and accounted but not timed.`,
    `- ${(st.slow_subscribers as string[]).length} slow subscribers (${(st.slow_subscribers as string[]).join(', ')}) ask for coefficients and measurements of every result and read ${(Number(st.slow_read_bytes_per_s) / 1024).toFixed(0)} KiB/s.`,
    `- A step passes when p99 ≤ ${st.p99_limit_ms} ms, loss (refused + dropped) ≤ ${(100 * Number(st.loss_limit)).toFixed(2)} %, the timing subscriber never fell behind and every frame was answered within ${Number(st.drain_timeout_ms) / 1000} s after sending stopped. ` +
      'Saturation is the highest offered load that passed: loads grow geometrically until a step fails, then the bracket is narrowed by geometric bisection.',
    "- `in daemon`: the daemon's own receipt-to-publication latency from its metrics histogram (bucket bounds, so an upper bound of each percentile); the rest of the end-to-end latency is the generator, the two WebSocket hops and the subscriber.",
    "- The bare solve time is the daemon's per-stream solver code (StreamSolver) run in the generator's process on the same frames, warm-started, back to back, before the load starts. `solve in daemon` is the solver time the daemon's workers reported for the timed frames themselves: the same code on a machine shared with the daemon's other threads and the generator.",
    '- Daemon CPU (% of one core) and resident memory come from /proc/<pid>/stat and /proc/<pid>/status of the daemon process (its worker threads included). ' +
      "`other programs CPU %` is the machine's busy time (/proc/stat) less the daemon's and the generator's over the same window: other work competing for the cores.",
    '- Accounting: for every step and every scenario, frames sent = solved + refused + dropped with a notice, from the timing subscriber\'s results and `missed` notices, ' +
      "cross-checked with the producers' acks and the daemon's own counters.",
    '',
  );
  for (const s of report.scenarios) out.push(scenarioMarkdown(s, report.mode));
  if (report.problems.length > 0) out.push('## Problems', '', ...report.problems.map((p) => `- ${p}`), '');
  return out.join('\n');
}
