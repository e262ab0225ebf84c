/**
 * The stream roster: one card per stream with its health at a glance — results per second,
 * lag from acquisition to solved, open alerts, results missed, and the latest quality flags.
 */
import { byId, element, renderFlags, setData, setText } from '../dom.js';
import { flagLabel, flagSeverity } from '../flags.js';
import { type DashboardStore, healthOf, missedTotal, type StreamState } from '../store.js';

const KIND_LABEL = { spectrum: 'spectral', delay_doppler: 'Gabor', signal: 'basis', coefficients: 'other' } as const;

interface Card {
  li: HTMLLIElement;
  kind: HTMLElement;
  rate: HTMLElement;
  lag: HTMLElement;
  alerts: HTMLElement;
  drops: HTMLElement;
  missed: HTMLElement;
  note: HTMLElement;
  flags: HTMLElement;
}

export class RosterView {
  private readonly cards = new Map<string, Card>();
  private readonly list = byId<HTMLOListElement>('roster');
  private readonly empty = byId('roster-empty');

  constructor(private readonly onChoose: (name: string) => void) {}

  draw(store: DashboardStore, chosen: string | null, now: number): void {
    this.empty.hidden = store.streams.size > 0;
    for (const stream of store.streams.values()) {
      const card = this.cards.get(stream.name) ?? this.add(stream.name);
      this.fill(card, stream, chosen, now);
    }
  }

  private add(name: string): Card {
    const li = element('li');
    li.dataset.stream = name;
    li.tabIndex = 0;
    const head = element('div', 'roster-name');
    const kind = element('span', 'kind');
    head.append(element('span', '', name), kind);
    const figures = element('dl', 'roster-figures');
    const figure = (label: string, title: string): HTMLElement => {
      const dt = element('dt', '', label);
      dt.title = title;
      const dd = element('dd', 'num', '–');
      figures.append(element('div'));
      figures.lastElementChild!.append(dt, dd);
      return dd;
    };
    const rate = figure('rate', 'results per second received');
    const lag = figure('lag', 'acquisition to solved, latest frame');
    const alerts = figure('alerts', 'alerts open now');
    const drops = figure('drops', 'frames the daemon dropped or refused (queue policy, no credit, bad frames)');
    const missed = figure('missed', 'results this page never received (passed over while it was behind, or never solved)');
    const note = element('p', 'roster-note quiet');
    const flags = element('ul', 'flag-row');
    li.append(head, figures, note, flags);
    li.addEventListener('click', () => this.onChoose(name));
    li.addEventListener('keydown', (ev) => {
      if (ev.key === 'Enter' || ev.key === ' ') this.onChoose(name);
    });
    this.list.append(li);
    const card = { li, kind, rate, lag, alerts, drops, missed, note, flags };
    this.cards.set(name, card);
    return card;
  }

  private fill(card: Card, stream: StreamState, chosen: string | null, now: number): void {
    setData(card.li, 'health', healthOf(stream, now));
    setData(card.li, 'results', String(stream.results));
    setData(card.li, 'open', String(stream.open));
    card.li.setAttribute('aria-current', String(stream.name === chosen));
    setText(card.kind, KIND_LABEL[stream.shape.kind]);
    setText(card.rate, stream.latest ? `${stream.rate.perSecond(now).toFixed(1)}/s` : '–');
    const latest = stream.latest;
    setText(card.lag, latest ? formatMs(latest.solved_at - latest.time) : '–');
    setText(card.alerts, String(stream.openAlerts.size));
    card.alerts.classList.toggle('hot', stream.openAlerts.size > 0);
    const drops = stream.daemon?.drops;
    setText(card.drops, drops === undefined ? '–' : String(drops));
    card.drops.classList.toggle('hot', (drops ?? 0) > 0);
    const missed = missedTotal(stream);
    setText(card.missed, String(missed));
    card.missed.classList.toggle('hot', missed > 0);
    let note = '';
    if (!stream.open) note = 'closed by its producer';
    else if (stream.daemon && !stream.daemon.producerConnected) note = 'no producer connected';
    else if (stream.daemon && stream.daemon.queueDepth > 0) note = `${stream.daemon.queueDepth} frames queued`;
    setText(card.note, note);
    card.note.hidden = note === '';
    renderFlags(card.flags, latest?.flags ?? [], flagSeverity, flagLabel);
  }
}

export function formatMs(ms: number): string {
  if (!Number.isFinite(ms)) return '–';
  if (Math.abs(ms) < 10) return `${ms.toFixed(1)} ms`;
  if (Math.abs(ms) < 10_000) return `${Math.round(ms)} ms`;
  return `${(ms / 1000).toFixed(0)} s`;
}
