/**
 * The report's plot: per scenario, end-to-end latency percentiles (log scale) against offered
 * load, with the saturation load and the p99 limit marked. Plain SVG written by hand, so the
 * report needs no plotting library and diffs well in review.
 */
export interface PlotPoint {
  offeredFps: number;
  p50: number;
  p90: number;
  p99: number;
  p999: number;
  /** Whether the step passed its limits (failing points are drawn hollow). */
  pass: boolean;
}

export interface PlotPanel {
  title: string;
  points: PlotPoint[];
  saturationFps: number | null;
  p99LimitMs: number;
}

const SERIES = [
  { key: 'p50', label: 'median', colour: '#1f5f99' },
  { key: 'p90', label: '90th pct', colour: '#3d8a4f' },
  { key: 'p99', label: '99th pct', colour: '#c4621b' },
  { key: 'p999', label: '99.9th pct', colour: '#7a3f9d' },
] as const;

const WIDTH = 760;
const PANEL_HEIGHT = 300;
const MARGIN = { left: 70, right: 150, top: 36, bottom: 46 };

export function escapeXml(text: string): string {
  return text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
}

/** A 1–2–5 step giving about `count` intervals over `span`. */
export function niceStep(span: number, count = 5): number {
  if (!(span > 0)) return 1;
  const raw = span / count;
  const power = 10 ** Math.floor(Math.log10(raw));
  const unit = raw / power;
  return (unit <= 1 ? 1 : unit <= 2 ? 2 : unit <= 5 ? 5 : 10) * power;
}

const fmt = (v: number) => (Math.abs(v) >= 1000 ? `${+(v / 1000).toFixed(1)}k` : `${+v.toFixed(v < 10 ? 1 : 0)}`);

function panelSvg(panel: PlotPanel, top: number): string {
  const plotW = WIDTH - MARGIN.left - MARGIN.right;
  const plotH = PANEL_HEIGHT - MARGIN.top - MARGIN.bottom;
  const x0 = MARGIN.left;
  const y0 = top + MARGIN.top;
  const out: string[] = [];
  out.push(`<text x="${x0}" y="${top + 22}" class="title">${escapeXml(panel.title)}</text>`);
  const points = [...panel.points].sort((a, b) => a.offeredFps - b.offeredFps);
  if (points.length === 0) {
    out.push(`<text x="${x0 + plotW / 2}" y="${y0 + plotH / 2}" text-anchor="middle" class="note">no steps ran</text>`);
    return out.join('\n');
  }
  const values = points.flatMap((p) => SERIES.map((s) => p[s.key])).filter((v) => v > 0);
  values.push(panel.p99LimitMs);
  const lo = Math.floor(Math.log10(Math.max(1e-3, Math.min(...values))));
  const hi = Math.max(lo + 1, Math.ceil(Math.log10(Math.max(...values))));
  const xMax = Math.max(...points.map((p) => p.offeredFps), panel.saturationFps ?? 0) * 1.05 || 1;
  const xStep = niceStep(xMax);
  const sx = (v: number) => x0 + (v / xMax) * plotW;
  const sy = (ms: number) => y0 + plotH - ((Math.log10(Math.max(ms, 10 ** lo)) - lo) / (hi - lo)) * plotH;

  out.push(`<rect x="${x0}" y="${y0}" width="${plotW}" height="${plotH}" class="frame"/>`);
  for (let e = lo; e <= hi; e++) {
    const y = sy(10 ** e);
    out.push(`<line x1="${x0}" x2="${x0 + plotW}" y1="${y.toFixed(1)}" y2="${y.toFixed(1)}" class="grid"/>`);
    out.push(`<text x="${x0 - 8}" y="${(y + 4).toFixed(1)}" text-anchor="end" class="tick">${fmt(10 ** e)}</text>`);
  }
  for (let v = 0; v <= xMax + 1e-9; v += xStep) {
    const x = sx(v);
    out.push(`<line x1="${x.toFixed(1)}" x2="${x.toFixed(1)}" y1="${y0}" y2="${y0 + plotH}" class="grid"/>`);
    out.push(`<text x="${x.toFixed(1)}" y="${y0 + plotH + 16}" text-anchor="middle" class="tick">${fmt(v)}</text>`);
  }
  out.push(`<text x="${x0 + plotW / 2}" y="${y0 + plotH + 36}" text-anchor="middle" class="axis">offered load (frames/s, all streams)</text>`);
  out.push(`<text transform="translate(${x0 - 52} ${y0 + plotH / 2}) rotate(-90)" text-anchor="middle" class="axis">end-to-end latency (ms)</text>`);

  const limitY = sy(panel.p99LimitMs);
  out.push(`<line x1="${x0}" x2="${x0 + plotW}" y1="${limitY.toFixed(1)}" y2="${limitY.toFixed(1)}" class="limit"/>`);
  out.push(`<text x="${x0 + 4}" y="${(limitY - 4).toFixed(1)}" class="mark limit-label">p99 limit ${fmt(panel.p99LimitMs)} ms</text>`);
  if (panel.saturationFps !== null && panel.saturationFps > 0) {
    const x = sx(panel.saturationFps);
    out.push(`<line x1="${x.toFixed(1)}" x2="${x.toFixed(1)}" y1="${y0}" y2="${y0 + plotH}" class="saturation"/>`);
    out.push(`<text x="${(x + 4).toFixed(1)}" y="${y0 + 12}" class="mark">saturation ${fmt(panel.saturationFps)}/s</text>`);
  }
  SERIES.forEach((s, i) => {
    const path = points.map((p, j) => `${j === 0 ? 'M' : 'L'}${sx(p.offeredFps).toFixed(1)},${sy(p[s.key]).toFixed(1)}`).join(' ');
    out.push(`<path d="${path}" fill="none" stroke="${s.colour}" stroke-width="1.8"/>`);
    for (const p of points) {
      const fill = p.pass ? s.colour : '#ffffff';
      out.push(`<circle cx="${sx(p.offeredFps).toFixed(1)}" cy="${sy(p[s.key]).toFixed(1)}" r="3" fill="${fill}" stroke="${s.colour}" stroke-width="1.5"/>`);
    }
    const ly = y0 + 40 + i * 18;
    out.push(`<line x1="${x0 + plotW + 8}" x2="${x0 + plotW + 28}" y1="${ly - 4}" y2="${ly - 4}" stroke="${s.colour}" stroke-width="2"/>`);
    out.push(`<text x="${x0 + plotW + 32}" y="${ly}" class="legend">${s.label}</text>`);
  });
  out.push(`<text x="${x0 + plotW + 8}" y="${y0 + 40 + SERIES.length * 18 + 6}" class="note">hollow: step failed</text>`);
  return out.join('\n');
}

export function latencyPlotSvg(panels: PlotPanel[], description: string): string {
  const height = Math.max(1, panels.length) * PANEL_HEIGHT;
  return [
    `<svg xmlns="http://www.w3.org/2000/svg" width="${WIDTH}" height="${height}" viewBox="0 0 ${WIDTH} ${height}" role="img" aria-labelledby="plot-title plot-desc">`,
    `<title id="plot-title">End-to-end latency percentiles against offered load</title>`,
    `<desc id="plot-desc">${escapeXml(description)}</desc>`,
    '<style>',
    'text { font-family: sans-serif; fill: #222; }',
    '.title { font-size: 14px; font-weight: bold; } .tick, .legend, .mark, .note { font-size: 11px; } .axis { font-size: 12px; }',
    '.note { fill: #666; } .frame { fill: #fff; stroke: #999; } .grid { stroke: #e4e4e4; } .limit-label { fill: #b22222; }',
    '.limit { stroke: #b22222; stroke-dasharray: 2 3; stroke-width: 1.2; } .saturation { stroke: #555; stroke-dasharray: 6 4; stroke-width: 1.2; }',
    '</style>',
    `<rect width="${WIDTH}" height="${height}" fill="#fafafa"/>`,
    ...panels.map((p, i) => panelSvg(p, i * PANEL_HEIGHT)),
    '</svg>',
    '',
  ].join('\n');
}
