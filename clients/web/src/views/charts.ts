/**
 * uPlot charts in the dashboard's own type and colours: one place for the shared options, so
 * every chart looks alike, and one resize rule (charts follow their container's width).
 */
import uPlot from 'uplot';

export function cssColor(name: string, fallback: string): string {
  return getComputedStyle(document.documentElement).getPropertyValue(name).trim() || fallback;
}

export function axisStyle(label?: string): uPlot.Axis {
  const ink = cssColor('--ink-soft', '#666');
  return {
    stroke: ink,
    font: '11px ui-monospace, "DejaVu Sans Mono", monospace',
    labelFont: '11px ui-monospace, "DejaVu Sans Mono", monospace',
    grid: { stroke: cssColor('--rule', '#ddd'), width: 1 },
    ticks: { stroke: cssColor('--rule', '#ddd'), width: 1, size: 4 },
    ...(label ? { label, labelSize: 16 } : {}),
  };
}

/** Creates a chart sized to `host` and keeps it sized when the host's width changes. */
export function mountChart(host: HTMLElement, options: Omit<uPlot.Options, 'width'>, data: uPlot.AlignedData): uPlot {
  const chart = new uPlot({ ...options, width: Math.max(120, host.clientWidth) }, data, host);
  new ResizeObserver(() => {
    const width = Math.max(120, host.clientWidth);
    if (Math.abs(width - chart.width) > 1) chart.setSize({ width, height: options.height });
  }).observe(host);
  return chart;
}
