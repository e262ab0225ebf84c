/**
 * The connection badge in the masthead: live, behind (the daemon is conflating results for
 * this page: only the latest per stream gets through), or disconnected with the time to the
 * next attempt. The state is also on <body data-link="..."> for tests and tools.
 */
import type { LinkState } from '../connection.js';
import { byId, setData, setText } from '../dom.js';

export type LinkBadge = 'connecting' | 'live' | 'behind' | 'waiting';

export class LinkView {
  private readonly badge = byId('link');
  private readonly text = byId('link-text');
  private readonly retry = byId<HTMLButtonElement>('link-retry');

  constructor(onRetry: () => void) {
    this.retry.addEventListener('click', onRetry);
  }

  draw(state: LinkState, behind: boolean, streams: number, now: number): void {
    let badge: LinkBadge;
    let text: string;
    switch (state.kind) {
      case 'live':
        badge = behind ? 'behind' : 'live';
        text = behind
          ? 'behind: this page is slower than the streams; showing the latest results only'
          : `live · ${streams} stream${streams === 1 ? '' : 's'}`;
        break;
      case 'connecting':
        badge = 'connecting';
        text = state.attempt === 0 ? 'connecting…' : `reconnecting (attempt ${state.attempt + 1})…`;
        break;
      case 'waiting': {
        badge = 'waiting';
        const seconds = Math.max(0, Math.ceil((state.retryAt - now) / 1000));
        text = `disconnected (${state.reason}) · retry ${state.attempt + 1} in ${seconds} s`;
        break;
      }
      case 'stopped':
        badge = 'waiting';
        text = 'disconnected';
        break;
    }
    setData(this.badge, 'link', badge);
    setData(document.body, 'link', badge);
    setText(this.text, text);
    this.retry.hidden = state.kind !== 'waiting';
  }
}
