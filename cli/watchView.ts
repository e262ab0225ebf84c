import type { AlertMessage, MissedMessage, StreamEventMessage } from '../protocol/index.js';
import type { Result } from '../clients/index.js';
import { formatNumber } from './statusBoard.js';

/** How `sparsewire watch` shows what arrives: JSON lines, plain lines, or a redrawn table. */

export interface TopCoefficient {
  index: number;
  re: number;
  im: number;
  abs: number;
}

export function topCoefficients(r: Result, k: number): TopCoefficient[] {
  const source = r.top_k ?? r.coefficients;
  if (!source) return [];
  const all: TopCoefficient[] = Array.from(source.indices, (index, i) => {
    const re = source.values[2 * i]!;
    const im = source.values[2 * i + 1]!;
    return { index, re, im, abs: Math.hypot(re, im) };
  });
  return all.sort((a, b) => b.abs - a.abs).slice(0, k);
}

/** Milliseconds from the frame's acquisition to now (assumes the producer's clock is in step). */
export function lagMs(r: Result, now: number): number {
  return now - r.time;
}

export function resultJson(r: Result, k: number, now: number): string {
  return JSON.stringify({
    event: 'result',
    stream: r.stream,
    seq: r.seq,
    time: r.time,
    solved_at: r.solved_at,
    received_at: now,
    lag_ms: lagMs(r, now),
    flags: r.flags,
    evidence: r.evidence,
    top: topCoefficients(r, k),
  });
}

export function noticeJson(msg: AlertMessage | MissedMessage | StreamEventMessage, now: number): string {
  if (msg.type === 'stream_event') {
    const { v: _v, type: _t, event, ...fields } = msg;
    return JSON.stringify({ event: 'stream', change: event, ...fields, received_at: now });
  }
  const { v: _v, type, ...fields } = msg;
  return JSON.stringify({ event: type, ...fields, received_at: now });
}

export function resultLine(r: Result, k: number, now: number): string {
  const e = r.evidence;
  const top = topCoefficients(r, k)
    .map((c) => `${c.index}:${formatNumber(c.abs)}`)
    .join(' ');
  return [
    `${r.stream} #${r.seq}`,
    `lag ${formatNumber(lagMs(r, now))} ms`,
    `rel.residual ${formatNumber(e.relative_residual)}`,
    `iterations ${e.iterations}`,
    `support ${e.support_size} (+${e.added} -${e.removed})`,
    `flags ${r.flags.length > 0 ? r.flags.join(',') : '-'}`,
    ...(top ? [`top ${top}`] : []),
  ].join('  ');
}

export function noticeLine(msg: AlertMessage | MissedMessage | StreamEventMessage): string {
  switch (msg.type) {
    case 'alert':
      return `ALERT ${msg.state} ${msg.stream} #${msg.seq}: ${msg.metric} ${formatNumber(msg.value)} ${msg.state === 'raised' ? 'above' : 'below'} ${msg.limit}`;
    case 'missed':
      return `missed ${msg.stream} #${msg.from_seq}-#${msg.to_seq}: ${msg.count} results (${msg.reason})`;
    case 'stream_event':
      return `stream ${msg.event}: ${msg.stream}`;
  }
}

/** The live table: one row per stream with its latest result, then the alerts currently raised. */
export class WatchTable {
  readonly #latest = new Map<string, { result: Result; receivedAt: number; count: number }>();
  readonly #raised = new Map<string, AlertMessage>();
  readonly #recent: string[] = [];

  result(r: Result, now: number): void {
    const count = (this.#latest.get(r.stream)?.count ?? 0) + 1;
    this.#latest.set(r.stream, { result: r, receivedAt: now, count });
  }

  notice(msg: AlertMessage | MissedMessage | StreamEventMessage): void {
    if (msg.type === 'alert') {
      const key = `${msg.stream}/${msg.rule}`;
      if (msg.state === 'raised') this.#raised.set(key, msg);
      else this.#raised.delete(key);
    }
    this.#recent.push(noticeLine(msg));
    if (this.#recent.length > 5) this.#recent.shift();
  }

  render(k: number): string {
    const rows = [...this.#latest.entries()].map(([name, { result: r, receivedAt, count }]) => {
      const e = r.evidence;
      const top = topCoefficients(r, k)
        .map((c) => `${c.index}:${formatNumber(c.abs)}`)
        .join(' ');
      return [
        name,
        `#${r.seq}`,
        String(count),
        `${formatNumber(lagMs(r, receivedAt))} ms`,
        formatNumber(e.relative_residual),
        String(e.iterations),
        String(e.support_size),
        r.flags.join(',') || '-',
        top || '-',
      ];
    });
    const header = ['stream', 'seq', 'results', 'lag', 'rel.res', 'iter', 'support', 'flags', `top ${k}`];
    const widths = header.map((h, i) => Math.max(h.length, ...rows.map((row) => row[i]!.length)));
    const line = (cells: string[]) => cells.map((c, i) => (i === cells.length - 1 ? c : c.padEnd(widths[i]!))).join('  ');
    const raised = [...this.#raised.values()].map((a) => `  ${a.stream}: ${a.metric} above ${a.limit} since #${a.seq}`);
    return [
      line(header),
      ...rows.map(line),
      '',
      `alerts raised: ${raised.length === 0 ? 'none' : ''}`,
      ...raised,
      '',
      'recent notices:',
      ...this.#recent.map((n) => `  ${n}`),
    ].join('\n');
  }
}
