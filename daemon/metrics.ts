/**
 * A small metrics registry that renders the Prometheus text exposition format (version 0.0.4):
 * counters, gauges and histograms with fixed label names. Label values must come from small,
 * closed sets (reasons, roles): stream names never become labels (they live in /v1/streams).
 */

type LabelValues = Record<string, string>;

function escapeLabel(v: string): string {
  return v.replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/\n/g, '\\n');
}

function escapeHelp(v: string): string {
  return v.replace(/\\/g, '\\\\').replace(/\n/g, '\\n');
}

function labelText(names: readonly string[], values: LabelValues, extra?: [string, string]): string {
  const parts = names.map((n) => `${n}="${escapeLabel(values[n] ?? '')}"`);
  if (extra) parts.push(`${extra[0]}="${escapeLabel(extra[1])}"`);
  return parts.length ? `{${parts.join(',')}}` : '';
}

function formatNumber(v: number): string {
  if (v === Number.POSITIVE_INFINITY) return '+Inf';
  if (v === Number.NEGATIVE_INFINITY) return '-Inf';
  if (Number.isNaN(v)) return 'NaN';
  return String(v);
}

interface Metric {
  readonly name: string;
  render(): string;
}

abstract class Labelled<T> implements Metric {
  protected readonly series = new Map<string, { labels: LabelValues; value: T }>();

  constructor(
    readonly name: string,
    readonly help: string,
    readonly type: 'counter' | 'gauge' | 'histogram',
    readonly labelNames: readonly string[],
  ) {}

  protected entry(labels: LabelValues): { labels: LabelValues; value: T } {
    for (const n in labels) {
      if (!this.labelNames.includes(n)) throw new Error(`metric ${this.name} has no label "${n}"`);
    }
    const key = this.labelNames.map((n) => labels[n] ?? '').join('\u0000');
    let e = this.series.get(key);
    if (e === undefined) {
      e = { labels: { ...labels }, value: this.initial() };
      this.series.set(key, e);
    }
    return e;
  }

  protected abstract initial(): T;
  protected abstract renderSeries(labels: LabelValues, value: T): string[];

  render(): string {
    const lines = [`# HELP ${this.name} ${escapeHelp(this.help)}`, `# TYPE ${this.name} ${this.type}`];
    if (this.series.size === 0 && this.labelNames.length === 0) this.entry({});
    for (const { labels, value } of this.series.values()) lines.push(...this.renderSeries(labels, value));
    return lines.join('\n');
  }
}

export class Counter extends Labelled<number> {
  constructor(name: string, help: string, labelNames: readonly string[] = []) {
    super(name, help, 'counter', labelNames);
  }
  protected initial(): number {
    return 0;
  }
  inc(labels: LabelValues = {}, by = 1): void {
    if (!(by >= 0)) throw new Error(`counter ${this.name} can only go up`);
    this.entry(labels).value += by;
  }
  get(labels: LabelValues = {}): number {
    return this.entry(labels).value;
  }
  /** Sum over every label combination. */
  total(): number {
    let t = 0;
    for (const e of this.series.values()) t += e.value;
    return t;
  }
  protected renderSeries(labels: LabelValues, value: number): string[] {
    return [`${this.name}${labelText(this.labelNames, labels)} ${formatNumber(value)}`];
  }
}

/** A gauge read at scrape time from a callback. */
export class Gauge implements Metric {
  constructor(
    readonly name: string,
    readonly help: string,
    private readonly read: () => number,
  ) {}
  get(): number {
    return this.read();
  }
  render(): string {
    return [`# HELP ${this.name} ${escapeHelp(this.help)}`, `# TYPE ${this.name} gauge`, `${this.name} ${formatNumber(this.read())}`].join('\n');
  }
}

interface HistogramState {
  counts: Float64Array;
  sum: number;
  count: number;
}

export class Histogram extends Labelled<HistogramState> {
  private readonly bounds: number[];

  constructor(name: string, help: string, buckets: number[], labelNames: readonly string[] = []) {
    super(name, help, 'histogram', labelNames);
    this.bounds = [...buckets].sort((a, b) => a - b);
  }
  protected initial(): HistogramState {
    return { counts: new Float64Array(this.bounds.length), sum: 0, count: 0 };
  }
  observe(value: number, labels: LabelValues = {}): void {
    const s = this.entry(labels).value;
    for (let i = 0; i < this.bounds.length; i++) {
      if (value <= this.bounds[i]!) {
        s.counts[i]!++;
        break;
      }
    }
    s.sum += value;
    s.count++;
  }
  count(labels: LabelValues = {}): number {
    return this.entry(labels).value.count;
  }
  protected renderSeries(labels: LabelValues, s: HistogramState): string[] {
    const lines: string[] = [];
    let cumulative = 0;
    this.bounds.forEach((le, i) => {
      cumulative += s.counts[i]!;
      lines.push(`${this.name}_bucket${labelText(this.labelNames, labels, ['le', formatNumber(le)])} ${cumulative}`);
    });
    lines.push(`${this.name}_bucket${labelText(this.labelNames, labels, ['le', '+Inf'])} ${s.count}`);
    lines.push(`${this.name}_sum${labelText(this.labelNames, labels)} ${formatNumber(s.sum)}`);
    lines.push(`${this.name}_count${labelText(this.labelNames, labels)} ${s.count}`);
    return lines;
  }
}

/** `count` buckets starting at `start`, each `factor` times the previous. */
export function exponentialBuckets(start: number, factor: number, count: number): number[] {
  return Array.from({ length: count }, (_, i) => start * factor ** i);
}

export class MetricsRegistry {
  private readonly metrics = new Map<string, Metric>();

  private add<M extends Metric>(m: M): M {
    if (this.metrics.has(m.name)) throw new Error(`metric ${m.name} registered twice`);
    this.metrics.set(m.name, m);
    return m;
  }
  counter(name: string, help: string, labelNames: readonly string[] = []): Counter {
    return this.add(new Counter(name, help, labelNames));
  }
  gauge(name: string, help: string, read: () => number): Gauge {
    return this.add(new Gauge(name, help, read));
  }
  histogram(name: string, help: string, buckets: number[], labelNames: readonly string[] = []): Histogram {
    return this.add(new Histogram(name, help, buckets, labelNames));
  }
  /** The whole registry in Prometheus text format (Content-Type text/plain; version=0.0.4). */
  render(): string {
    return [...this.metrics.values()].map((m) => m.render()).join('\n') + '\n';
  }
}
