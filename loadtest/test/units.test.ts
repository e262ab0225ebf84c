import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { binToFloat64, decode, encode, float64ToBin, streamNameProblem } from '../../protocol/index.js';
import { mixtureMedian, quantile } from '../bareSolve.js';
import { bucketQuantileMs, countersFromText, samplesByLabel, sumSamples } from '../daemonCounters.js';
import { LatencyRecorder } from '../latency.js';
import { packFrame } from '../loadProducers.js';
import { cpuSecondsFromStat, kilobytesField, machineCpuFromStat, sampleProcess } from '../procStats.js';
import { buildScenario, frameShares, perStreamRates, SCENARIO_NAMES, type Scenario } from '../scenarios.js';
import { bracket, nextLoad, tryLoad } from '../search.js';
import { escapeXml, latencyPlotSvg, niceStep } from '../svgPlot.js';

describe('latency recorder (HdrHistogram)', () => {
  it('gives every percentile within 0.1 % of the exact nearest-rank value', () => {
    // HdrHistogram with 3 significant digits keeps values to within 1 part in 1000 (HdrHistogram
    // documentation, "numberOfSignificantValueDigits"); nearest rank is the definition it reports.
    const values = Array.from({ length: 20_000 }, (_, i) => 0.05 + ((i * 7919) % 20_000) * 0.013); // 0.05 … 260 ms
    const recorder = new LatencyRecorder();
    for (const v of values) recorder.record(v);
    const sorted = [...values].sort((a, b) => a - b);
    const s = recorder.summary();
    expect(s.count).toBe(values.length);
    for (const [p, got] of [[0.5, s.p50], [0.9, s.p90], [0.99, s.p99], [0.999, s.p999], [1, s.max]] as const) {
      const exact = quantile(sorted, p);
      expect(Math.abs(got - exact) / exact).toBeLessThan(1.5e-3); // 0.1 % plus the microsecond rounding of the input
    }
  });

  it('reports zeros when nothing was recorded', () => {
    expect(new LatencyRecorder().summary()).toEqual({ count: 0, mean: 0, p50: 0, p90: 0, p99: 0, p999: 0, max: 0 });
  });
});

describe('frames packed by the generator', () => {
  it("are the bytes the protocol's encoder makes, and decode (with validation) to the frame sent", () => {
    // The protocol's own codec is the reference: same MessagePack map, validated by its schema.
    const y = new Float64Array([1.5, -2.25, 0, 3e-300, -0, 7]);
    const time = performance.timeOrigin + 1234.5678;
    const bytes = packFrame('lt.small.007', 41, time, float64ToBin(y));
    expect(Buffer.from(bytes).equals(Buffer.from(encode({ v: 1, type: 'frame', stream: 'lt.small.007', seq: 41, time, y: float64ToBin(y) })))).toBe(true);
    const msg = decode(bytes);
    expect(msg).toMatchObject({ v: 1, type: 'frame', stream: 'lt.small.007', seq: 41, time });
    expect(Array.from(binToFloat64((msg as { y: Uint8Array }).y, 'y'))).toEqual(Array.from(y));
  });
});

describe('quantiles of bare solve times', () => {
  it('nearest rank: the smallest value with at least q of the values at or below it', () => {
    // Definition (Hyndman & Fan 1996, type 1, the inverse of the empirical distribution function).
    expect(quantile([1, 2, 3, 4], 0.5)).toBe(2);
    expect(quantile([1, 2, 3, 4, 5], 0.5)).toBe(3);
    expect(quantile([1, 2, 3, 4], 0.9)).toBe(4);
    expect(quantile([7], 0.01)).toBe(7);
  });

  it('mixture median weighs each group by its share of the frames', () => {
    // Closed form: 90 % of frames take 1 ms and 10 % take 50 ms, so the median frame takes 1 ms;
    // with the shares reversed it takes 50 ms.
    const fast = { samplesMs: [1, 1, 1], share: 0.9 };
    const slow = { samplesMs: [50], share: 0.1 };
    expect(mixtureMedian([fast, slow])).toBe(1);
    expect(mixtureMedian([{ ...fast, share: 0.1 }, { ...slow, share: 0.9 }])).toBe(50);
  });
});

describe('/proc readings', () => {
  it('reads utime + stime from fields 14 and 15 even when the command name holds spaces and parentheses', () => {
    // Layout from proc(5): pid (comm) state ppid pgrp session tty_nr tpgid flags minflt cminflt majflt cmajflt utime stime …
    const stat = '4242 (node (x) y) S 1 4242 4242 0 -1 4194304 100 0 0 0 250 50 0 0 20 0 11 0 12345 1000000 2500 0';
    expect(cpuSecondsFromStat(stat, 100)).toBeCloseTo(3, 12);
  });

  it('reads busy and total machine time from the cpu line of /proc/stat', () => {
    // proc(5): cpu user nice system idle iowait irq softirq steal guest guest_nice (guest is inside user).
    const stat = 'cpu  1000 50 300 8000 100 20 30 0 400 0\ncpu0 500 25 150 4000 50 10 15 0 200 0\n';
    expect(machineCpuFromStat(stat, 100)).toEqual({ busySeconds: 14, totalSeconds: 95 });
  });

  it('reads kB fields of /proc/<pid>/status in bytes', () => {
    const status = 'Name:\tnode\nVmHWM:\t  204800 kB\nVmRSS:\t  102400 kB\nThreads:\t11\n';
    expect(kilobytesField(status, 'VmRSS')).toBe(102400 * 1024);
    expect(kilobytesField(status, 'VmHWM')).toBe(204800 * 1024);
    expect(() => kilobytesField(status, 'VmSwap')).toThrow(/VmSwap/);
  });

  it.runIf(process.platform === 'linux')("agrees with Node's own resident set size for this process", () => {
    // process.memoryUsage().rss is the resident set size (Node.js documentation); both read the kernel's count.
    const sample = sampleProcess(process.pid);
    const rss = process.memoryUsage().rss;
    expect(Math.abs(sample.rssBytes - rss) / rss).toBeLessThan(0.1);
    expect(sample.peakRssBytes).toBeGreaterThanOrEqual(sample.rssBytes);
    expect(sample.cpuSeconds).toBeGreaterThan(0);
  });
});

describe('daemon counters from the metrics text', () => {
  it('sums each metric over its label sets and skips comments', () => {
    // Prometheus text exposition format 0.0.4: `name{label="v",…} value`, `#` lines are HELP/TYPE.
    const text = [
      '# HELP sparsewire_frames_refused_total Frames refused on arrival.',
      '# TYPE sparsewire_frames_refused_total counter',
      'sparsewire_frames_refused_total{reason="queue_full"} 7',
      'sparsewire_frames_refused_total{reason="duplicate"} 2',
      'sparsewire_frames_received_total 120',
      'sparsewire_frames_solved_total 100',
      'sparsewire_frames_dropped_total{reason="dropped_by_queue"} 11',
      'sparsewire_solve_seconds_bucket{le="+Inf"} 100',
      '',
    ].join('\n');
    expect(sumSamples(text).get('sparsewire_solve_seconds_bucket')).toBe(100);
    expect(countersFromText(text)).toEqual({ received: 120, solved: 100, refused: 9, dropped: 11, resultsMissed: 0, connectionsClosed: 0, watchClosures: {}, latencyBuckets: {} });
  });

  it('splits closed connections by reason for subscriber connections only', () => {
    const text = [
      'sparsewire_connections_closed_total{endpoint="watch",reason="no_pong"} 3',
      'sparsewire_connections_closed_total{endpoint="produce",reason="no_pong"} 1',
      'sparsewire_connections_closed_total{endpoint="watch",reason="hard_cap"} 2',
    ].join('\n');
    expect(samplesByLabel(text, 'sparsewire_connections_closed_total', 'reason', { endpoint: 'watch' })).toEqual({ no_pong: 3, hard_cap: 2 });
    expect(countersFromText(text)).toMatchObject({ connectionsClosed: 6, watchClosures: { no_pong: 3, hard_cap: 2 } });
  });
});

describe('quantile bounds from histogram buckets', () => {
  it('give the smallest bucket bound holding the fraction (cumulative buckets, Prometheus histogram convention)', () => {
    const buckets = { '0.001': 10, '0.002': 60, '0.004': 98, '0.008': 100, '+Inf': 100 };
    expect(bucketQuantileMs(buckets, 0.5)).toBe(2);
    expect(bucketQuantileMs(buckets, 0.98)).toBe(4);
    expect(bucketQuantileMs(buckets, 0.99)).toBe(8);
    expect(bucketQuantileMs({ '0.001': 0, '+Inf': 5 }, 0.5)).toBeUndefined(); // beyond the last finite bound
    expect(bucketQuantileMs({ '0.001': 0, '+Inf': 0 }, 0.5)).toBeUndefined();
  });
});

describe('scenarios', () => {
  it('split the offered load so that the streams add up to it, by their relative rates', () => {
    for (const name of SCENARIO_NAMES) {
      const scenario = buildScenario(name, { smallStreams: 1000 });
      const rates = perStreamRates(scenario, 1234);
      const total = scenario.groups.reduce((sum, g, i) => sum + g.count * rates[i]!, 0);
      expect(total).toBeCloseTo(1234, 9);
      expect(frameShares(scenario).reduce((a, b) => a + b, 0)).toBeCloseTo(1, 12);
      scenario.groups.forEach((g, i) => expect(rates[i]! / rates[0]!).toBeCloseTo(g.relativeRate / scenario.groups[0]!.relativeRate, 12));
    }
  });

  it('names streams the protocol accepts, uniquely, for 1000 streams under a run prefix', () => {
    const scenario: Scenario = buildScenario('small', { smallStreams: 1000 });
    const width = String(scenario.groups[0]!.count - 1).length;
    const names = Array.from({ length: 1000 }, (_, i) => `lt0a1b2c.small.small.${String(i).padStart(width, '0')}`);
    for (const n of names) expect(streamNameProblem(n)).toBeNull();
    expect(new Set(names).size).toBe(1000);
  });
});

describe('saturation search', () => {
  const settings = { growth: 1.6, precision: 0.1, minFps: 1 };

  /** Runs the search against a system that passes exactly the loads up to `capacity`. */
  function search(capacity: number, start: number, maxSteps: number) {
    const passed: number[] = [];
    const failed: number[] = [];
    let fps: number | null = start;
    let steps = 0;
    while (fps !== null && steps < maxSteps) {
      (fps <= capacity ? passed : failed).push(fps);
      steps++;
      fps = nextLoad(passed, failed, settings);
    }
    return { ...bracket(passed, failed), steps, done: fps === null };
  }

  it('brackets the capacity of a system within the precision and never reports more than it', () => {
    fc.assert(
      fc.property(fc.double({ min: 5, max: 1e5, noNaN: true }), fc.double({ min: 2, max: 1e5, noNaN: true }), (capacity, start) => {
        const r = search(capacity, start, 60);
        expect(r.done).toBe(true);
        if (r.passing === null) {
          // Nothing passed: the search went down to the floor without meeting the capacity.
          expect(start / capacity).toBeGreaterThan(1);
          return;
        }
        expect(r.passing).toBeLessThanOrEqual(capacity);
        if (r.failing !== null) {
          expect(r.failing).toBeGreaterThan(capacity);
          expect(r.failing / r.passing).toBeLessThanOrEqual(1 + settings.precision);
        }
      }),
      { numRuns: 300 },
    );
  });

  it('believes a pass at once, a failure only when it repeats undisturbed, and waits for quiet after a disturbed attempt', async () => {
    type Outcome = { pass: boolean; disturbed: boolean };
    const P = { pass: true, disturbed: false };
    const F = { pass: false, disturbed: false };
    const D = { pass: false, disturbed: true };
    const plan = { label: 'search 1', offeredFps: 100, seconds: 1, settleSeconds: 0 };
    async function attempts(outcomes: Outcome[], max = 3) {
      const labels: string[] = [];
      let waits = 0;
      const got = await tryLoad(
        async (p) => (labels.push(p.label), outcomes[labels.length - 1]!),
        plan,
        max,
        () => true,
        async () => waits++,
      );
      return { verdict: got.some((g) => g.pass), labels, waits };
    }
    expect(await attempts([P])).toEqual({ verdict: true, labels: ['search 1'], waits: 0 });
    expect(await attempts([F, P])).toEqual({ verdict: true, labels: ['search 1', 'search 1 (2)'], waits: 0 });
    expect(await attempts([F, F, P])).toMatchObject({ verdict: false, labels: ['search 1', 'search 1 (2)'] });
    expect(await attempts([D, F, P])).toEqual({ verdict: true, labels: ['search 1', 'search 1 (2)', 'search 1 (3)'], waits: 1 });
    expect(await attempts([D, D, D])).toEqual({ verdict: false, labels: ['search 1', 'search 1 (2)', 'search 1 (3)'], waits: 2 });
    expect(await attempts([F, F], 1)).toMatchObject({ verdict: false, labels: ['search 1'] });
  });

  it('ignores a failure below a load that passed (noise on a shared machine)', () => {
    expect(bracket([100, 300], [200, 500])).toEqual({ passing: 300, failing: 500 });
    expect(bracket([], [200])).toEqual({ passing: null, failing: 200 });
  });
});

describe('latency plot', () => {
  it('uses 1–2–5 steps', () => {
    expect(niceStep(1000)).toBe(200);
    expect(niceStep(7)).toBe(2);
    expect(niceStep(0.3)).toBeCloseTo(0.1, 12);
    expect(niceStep(0.2)).toBeCloseTo(0.05, 12);
    expect(niceStep(260)).toBe(100);
  });

  it('escapes text for XML', () => {
    expect(escapeXml('a < b & "c" > d')).toBe('a &lt; b &amp; &quot;c&quot; &gt; d');
  });

  it('draws one line per percentile and one marker per step and percentile, hollow when the step failed', () => {
    const points = [
      { offeredFps: 100, p50: 1, p90: 2, p99: 5, p999: 9, pass: true },
      { offeredFps: 300, p50: 3, p90: 9, p99: 80, p999: 200, pass: false },
      { offeredFps: 200, p50: 2, p90: 4, p99: 20, p999: 40, pass: true },
    ];
    const svg = latencyPlotSvg([{ title: 'one <panel>', points, saturationFps: 200, p99LimitMs: 50 }], 'test plot');
    expect(svg.startsWith('<svg ')).toBe(true);
    expect(svg.trimEnd().endsWith('</svg>')).toBe(true);
    expect(svg.match(/<path /g)).toHaveLength(4);
    expect(svg.match(/<circle /g)).toHaveLength(12);
    expect(svg.match(/<circle [^>]*fill="#ffffff"/g)).toHaveLength(4);
    expect(svg).toContain('one &lt;panel&gt;');
    expect(svg).toContain('saturation 200/s');
  });
});
