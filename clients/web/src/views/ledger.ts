/** The alert ledger: alerts raised and cleared, newest first, each naming its frame. */
import { byId, element } from '../dom.js';
import type { DashboardStore } from '../store.js';

export class LedgerView {
  private readonly list = byId<HTMLOListElement>('ledger');
  private readonly empty = byId('ledger-empty');
  private shown = -1;

  draw(store: DashboardStore): void {
    if (this.shown === store.version) return;
    this.shown = store.version;
    this.empty.hidden = store.ledger.length > 0;
    const items = store.ledger.map(({ alert, receivedAt }) => {
      const li = element('li');
      li.dataset.state = alert.state;
      li.dataset.stream = alert.stream;
      li.dataset.seq = String(alert.seq);
      li.dataset.metric = alert.metric;
      const head = element('div', 'ledger-head');
      head.append(element('span', 'ledger-state', alert.state), element('span', 'num quiet', new Date(receivedAt).toLocaleTimeString()));
      const comparison = alert.state === 'raised' ? 'above' : 'below';
      li.append(
        head,
        element('div', '', `${alert.stream} · frame ${alert.seq}`),
        element('div', 'num quiet', `${alert.metric.replaceAll('_', ' ')} ${formatValue(alert.value)} ${comparison} ${formatValue(alert.limit)}`),
      );
      return li;
    });
    this.list.replaceChildren(...items);
  }
}

function formatValue(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  return Math.abs(v) >= 1000 || (Math.abs(v) < 0.01 && v !== 0) ? v.toExponential(2) : v.toPrecision(3);
}
