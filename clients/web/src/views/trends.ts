/**
 * Trend charts over the last minutes of one stream: relative residual (log scale, with the
 * alert limit and clear level of the stream's relative-residual rule drawn across), iterations
 * and support size. Alert events are marked as vertical ticks on the residual chart.
 */
import uPlot from 'uplot';
import type { AlertRule } from '../../../../protocol/messages.js';
import type { LedgerEntry, StreamState } from '../store.js';
import { TREND_CAPACITY, TREND_ITERATIONS, TREND_RESIDUAL, TREND_SUPPORT } from '../store.js';
import { axisStyle, cssColor, mountChart } from './charts.js';

/** How far back the trend charts reach. */
export const TREND_SPAN_MS = 5 * 60_000;
/** Relative residuals below this are drawn at it (a log axis cannot show 0)... */
export const RESIDUAL_FLOOR = 1e-6;
/** ...and non-finite ones (a solve that blew up) at this height, off the usual scale. */
export const RESIDUAL_CEILING = 1e3;

const HEIGHT = 170;

export class TrendsView {
  private readonly times = new Float64Array(TREND_CAPACITY);
  private readonly seconds = new Float64Array(TREND_CAPACITY);
  private readonly columns = [new Float64Array(TREND_CAPACITY), new Float64Array(TREND_CAPACITY), new Float64Array(TREND_CAPACITY)];
  private rule: AlertRule | undefined;
  private readonly residual: uPlot;
  private readonly iterations: uPlot;
  private readonly support: uPlot;
  private markers: Array<{ time: number; raised: boolean }> = [];

  constructor(hosts: { residual: HTMLElement; iterations: HTMLElement; support: HTMLElement }) {
    const x = axisStyle();
    const sea = cssColor('--sea', '#1f6e6a');
    const brick = cssColor('--brick', '#b3402c');
    const amber = cssColor('--amber', '#b97d0e');
    const moss = cssColor('--moss', '#4c7a3b');
    this.residual = mountChart(
      hosts.residual,
      {
        height: HEIGHT,
        scales: {
          x: { time: true },
          // Decades that hold the data and the rule's two levels, so the limit is always in view.
          y: {
            distr: 3,
            range: (_u, min, max) => {
              const lo = Math.min(min, this.rule?.clear_below ?? min);
              const hi = Math.max(max, this.rule?.above ?? max);
              return [10 ** Math.floor(Math.log10(Math.max(lo, RESIDUAL_FLOOR))), 10 ** Math.ceil(Math.log10(Math.max(hi, RESIDUAL_FLOOR * 10)))];
            },
          },
        },
        axes: [x, { ...axisStyle(), size: 56, splits: decades }],
        series: [{}, { label: 'relative residual', stroke: sea, width: 1.5, points: { show: false } }],
        legend: { show: false },
        hooks: {
          draw: [
            (u) => {
              const ctx = u.ctx;
              const left = u.bbox.left;
              const right = u.bbox.left + u.bbox.width;
              ctx.save();
              if (this.rule) {
                ctx.lineWidth = 1.5 * devicePixelRatio;
                for (const [level, colour, dash] of [
                  [this.rule.above, brick, [6, 4]],
                  [this.rule.clear_below, amber, [2, 3]],
                ] as const) {
                  const y = u.valToPos(Math.max(level, RESIDUAL_FLOOR), 'y', true);
                  ctx.strokeStyle = colour;
                  ctx.setLineDash(dash.map((d) => d * devicePixelRatio));
                  ctx.beginPath();
                  ctx.moveTo(left, y);
                  ctx.lineTo(right, y);
                  ctx.stroke();
                }
                ctx.setLineDash([]);
              }
              ctx.lineWidth = 2 * devicePixelRatio;
              for (const m of this.markers) {
                const x = u.valToPos(m.time / 1000, 'x', true);
                if (x < left || x > right) continue;
                ctx.strokeStyle = m.raised ? brick : moss;
                ctx.beginPath();
                ctx.moveTo(x, u.bbox.top);
                ctx.lineTo(x, u.bbox.top + u.bbox.height);
                ctx.stroke();
              }
              ctx.restore();
            },
          ],
        },
      },
      [[], []],
    );
    this.iterations = mountCountChart(hosts.iterations, x, 'iterations', cssColor('--indigo', '#3d4f8e'));
    this.support = mountCountChart(hosts.support, x, 'support size', cssColor('--olive', '#6b7b2c'));
  }

  draw(stream: StreamState, ledger: readonly LedgerEntry[]): void {
    const latest = stream.latest;
    if (!latest) {
      this.residual.setData([[], []]);
      this.iterations.setData([[], []]);
      this.support.setData([[], []]);
      return;
    }
    const n = stream.trends.copyWindow(latest.time - TREND_SPAN_MS, this.times, this.columns);
    this.rule = residualRule(stream.declaration.alerts);
    const residual = this.columns[TREND_RESIDUAL]!;
    for (let i = 0; i < n; i++) {
      this.seconds[i] = this.times[i]! / 1000;
      const r = residual[i]!;
      residual[i] = Number.isFinite(r) ? Math.max(RESIDUAL_FLOOR, r) : RESIDUAL_CEILING;
    }
    this.markers = ledger
      .filter((e) => e.alert.stream === stream.name && e.frameTime !== null)
      .map((e) => ({ time: e.frameTime!, raised: e.alert.state === 'raised' }));
    const x = this.seconds.subarray(0, n);
    this.residual.setData([x, residual.subarray(0, n)]);
    this.iterations.setData([x, this.columns[TREND_ITERATIONS]!.subarray(0, n)]);
    this.support.setData([x, this.columns[TREND_SUPPORT]!.subarray(0, n)]);
  }
}

/** A chart of one count per frame (iterations, support size) on a linear axis from zero. */
function mountCountChart(host: HTMLElement, x: uPlot.Axis, label: string, stroke: string): uPlot {
  return mountChart(
    host,
    {
      height: HEIGHT,
      scales: { x: { time: true }, y: { range: (_u, _min, max) => [0, Math.max(1, max * 1.1)] } },
      axes: [x, { ...axisStyle(), size: 44 }],
      series: [{}, { label, stroke, width: 1.5, points: { show: false } }],
      legend: { show: false },
    },
    [[], []],
  );
}

/** Grid lines at whole decades only (uPlot's log axis would also draw 2×…9× each decade). */
function decades(_u: uPlot, _axis: number, min: number, max: number): number[] {
  const out: number[] = [];
  for (let e = Math.ceil(Math.log10(min) - 1e-9); 10 ** e <= max * (1 + 1e-9); e++) out.push(10 ** e);
  return out;
}

/** The first rule on the relative residual, whose limits the residual chart draws. */
function residualRule(rules: readonly AlertRule[] | undefined): AlertRule | undefined {
  return rules?.find((r) => r.metric === 'relative_residual');
}
