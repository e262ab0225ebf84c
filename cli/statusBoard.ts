import type { AlertMessage } from '../protocol/index.js';
import type { Result } from '../clients/index.js';

interface StreamStatus {
  sent: number;
  results: number;
  last?: Result;
  /** Rules currently raised, by rule index. */
  raised: Set<number>;
}

/** Per-stream counters and the latest evidence, rendered as one line per stream. */
export class StatusBoard {
  readonly #streams = new Map<string, StreamStatus>();

  #status(stream: string): StreamStatus {
    let s = this.#streams.get(stream);
    if (!s) this.#streams.set(stream, (s = { sent: 0, results: 0, raised: new Set() }));
    return s;
  }

  sent(stream: string): void {
    this.#status(stream).sent++;
  }

  result(r: Result): void {
    const s = this.#status(r.stream);
    s.results++;
    s.last = r;
  }

  alert(a: AlertMessage): void {
    const s = this.#status(a.stream);
    if (a.state === 'raised') s.raised.add(a.rule);
    else s.raised.delete(a.rule);
  }

  alertLine(a: AlertMessage): string {
    const relation = a.state === 'raised' ? `above ${a.limit}` : `below ${a.limit}`;
    return `alert ${a.state}: ${a.stream} at #${a.seq}, ${a.metric} ${formatNumber(a.value)} ${relation}`;
  }

  lines(): string[] {
    const width = Math.max(...[...this.#streams.keys()].map((k) => k.length), 6);
    return [...this.#streams.entries()].map(([name, s]) => {
      const e = s.last?.evidence;
      const evidence = e ? `rel.residual ${formatNumber(e.relative_residual)}  iterations ${e.iterations}  support ${e.support_size}` : 'no result yet';
      const flags = s.last && s.last.flags.length > 0 ? s.last.flags.join(',') : '-';
      const alert = s.raised.size > 0 ? '  ALERT' : '';
      return `${name.padEnd(width)}  sent ${String(s.sent).padStart(5)}  solved ${String(s.results).padStart(5)}  ${evidence}  flags ${flags}${alert}`;
    });
  }
}

export function formatNumber(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  if (v === 0) return '0';
  const a = Math.abs(v);
  return a >= 1e4 || a < 1e-3 ? v.toExponential(2) : v.toPrecision(3);
}
