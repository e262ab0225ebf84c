import { describe, expect, it } from 'vitest';
import { MetricsRegistry, exponentialBuckets } from '../metrics.js';

// Checked against the Prometheus text exposition format 0.0.4 (prometheus.io/docs/instrumenting/
// exposition_formats): HELP/TYPE lines, label escaping, cumulative histogram buckets with +Inf,
// _sum and _count.
describe('metrics registry', () => {
  it('renders counters with labels, escaping label values', () => {
    const r = new MetricsRegistry();
    const c = r.counter('x_total', 'Things.\nMore.', ['reason']);
    c.inc({ reason: 'a"b\\c' }, 2);
    c.inc({ reason: 'plain' });
    expect(r.render()).toBe(['# HELP x_total Things.\\nMore.', '# TYPE x_total counter', 'x_total{reason="a\\"b\\\\c"} 2', 'x_total{reason="plain"} 1', ''].join('\n'));
    expect(c.total()).toBe(3);
  });

  it('renders an unlabelled counter as 0 before its first increment, and refuses to go down', () => {
    const r = new MetricsRegistry();
    const c = r.counter('y_total', 'Y.');
    expect(r.render()).toContain('\ny_total 0\n');
    expect(() => c.inc({}, -1)).toThrow();
    expect(() => c.inc({ nope: 'x' })).toThrow(/no label/);
  });

  it('renders histograms with cumulative buckets, +Inf, sum and count', () => {
    const r = new MetricsRegistry();
    const h = r.histogram('t_seconds', 'T.', [0.1, 1, 0.5]);
    for (const v of [0.05, 0.2, 0.7, 3]) h.observe(v);
    expect(r.render().split('\n').slice(2, 9)).toEqual([
      't_seconds_bucket{le="0.1"} 1',
      't_seconds_bucket{le="0.5"} 2',
      't_seconds_bucket{le="1"} 3',
      't_seconds_bucket{le="+Inf"} 4',
      't_seconds_sum 3.95',
      't_seconds_count 4',
      '',
    ]);
  });

  it('reads gauges at render time and builds exponential buckets', () => {
    const r = new MetricsRegistry();
    let v = 1;
    r.gauge('g', 'G.', () => v);
    v = 7;
    expect(r.render()).toContain('\ng 7\n');
    expect(exponentialBuckets(0.5, 2, 4)).toEqual([0.5, 1, 2, 4]);
    expect(() => r.gauge('g', 'again', () => 0)).toThrow(/twice/);
  });
});
