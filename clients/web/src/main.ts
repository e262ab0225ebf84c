/**
 * The dashboard page: one watch subscription (keep-latest when behind), a store updated per
 * message, and a redraw per animation frame from the latest state only.
 */
import type { SubscribeMessage } from '../../../protocol/messages.js';
import { type LinkState, WatchLink } from './connection.js';
import { pollDaemonStreams } from './daemon-view.js';
import { byId, renderFlags, setText } from './dom.js';
import { flagLabel, flagSeverity } from './flags.js';
import { DashboardStore, type StreamState } from './store.js';
import { LedgerView } from './views/ledger.js';
import { LinkView } from './views/link.js';
import { RecoveryView } from './views/recovery.js';
import { RosterView } from './views/roster.js';
import { TrendsView } from './views/trends.js';

/**
 * What the page asks for: everything needed to draw, for every stream it may see (the
 * measurements, to draw measured samples over reconstructed waveforms).
 */
const WANTS: SubscribeMessage['want'] = ['coefficients', 'signal', 'measurements', 'quality', 'alerts'];
/** The roster's figures change every frame; redrawing them a few times a second is plenty. */
const ROSTER_EVERY_MS = 250;
/** How often the daemon's own stream figures (drops, queue) are fetched. */
const DAEMON_VIEW_EVERY_MS = 2000;

const params = new URLSearchParams(location.search);
const token = params.get('token');
const tokenQuery = token ? `?token=${encodeURIComponent(token)}` : '';
const watchUrl = `${location.protocol === 'https:' ? 'wss' : 'ws'}://${location.host}/v1/watch${tokenQuery}`;

const store = new DashboardStore();
let link: LinkState = { kind: 'connecting', attempt: 0 };
let chosen: string | null = chosenFromHash();
let badMessages = 0;
let lastBadMessage = '';
let messages = 0;
let subscriptions = 0;
// What the stage last drew, so a frame with nothing new draws nothing.
let stageStream: StreamState | null = null;
let stageShape: StreamState['shape'] | null = null;
let stageVersion = -1;
let rosterAt = 0;

const watch = new WatchLink({
  url: watchUrl,
  subscription: () => ({
    v: 1,
    type: 'subscribe',
    ref: `page-${++subscriptions}`,
    streams: '*',
    want: WANTS,
    when_behind: 'keep_latest',
  }),
  onMessage: (message, receivedAt) => {
    messages++;
    store.apply(message, receivedAt);
  },
  onState: (state) => {
    link = state;
  },
  onBadMessage: (problem) => {
    badMessages++;
    lastBadMessage = problem;
  },
});

const linkView = new LinkView(() => watch.retryNow());
const roster = new RosterView(choose);
const ledger = new LedgerView();
const recovery = new RecoveryView({
  caption: byId('recovery-caption'),
  plot: byId('recovery-plot'),
  heat: byId<HTMLCanvasElement>('heat'),
  readout: byId('recovery-readout'),
  side: byId('recovery-side'),
  sideCaption: byId('recovery-side-caption'),
  sidePlot: byId('recovery-side-plot'),
});
const trends = new TrendsView({ residual: byId('trend-residual'), iterations: byId('trend-iterations'), support: byId('trend-support') });
const stageTitle = byId('stage-title');
const stageAbout = byId('stage-about');
const stageFlags = byId('stage-flags');
const footnote = byId('footnote');
const stagePanels = [byId('recovery'), byId('trends')];

function chosenFromHash(): string | null {
  const name = new URLSearchParams(location.hash.slice(1)).get('stream');
  return name && name.length > 0 ? name : null;
}

function choose(name: string): void {
  if (name === chosen) return;
  chosen = name;
  rosterAt = 0; // show the new choice in the roster on the next frame
  history.replaceState(null, '', `${location.pathname}${location.search}#stream=${encodeURIComponent(name)}`);
}
window.addEventListener('hashchange', () => {
  chosen = chosenFromHash();
  rosterAt = 0;
});

function frame(): void {
  const now = Date.now();
  linkView.draw(link, store.behind(now), store.streams.size, now);
  if (chosen === null || !store.streams.has(chosen)) {
    const first = store.streams.keys().next();
    if (!first.done) choose(first.value);
  }
  if (now - rosterAt >= ROSTER_EVERY_MS) {
    rosterAt = now;
    roster.draw(store, chosen, now);
    setText(
      footnote,
      `watching ${location.host} · ${messages} messages` +
        (badMessages > 0 ? ` · ${badMessages} not understood (last: ${lastBadMessage})` : '') +
        (store.lastError ? ` · daemon said: ${store.lastError}` : ''),
    );
  }
  ledger.draw(store);
  const stream = chosen === null ? undefined : store.streams.get(chosen);
  if (stream) drawStage(stream);
  requestAnimationFrame(frame);
}

function drawStage(stream: StreamState): void {
  if (stream !== stageStream || stream.shape !== stageShape) {
    for (const panel of stagePanels) panel.hidden = false;
    stageStream = stream;
    stageShape = stream.shape;
    stageVersion = -1;
    setText(stageTitle, stream.name);
    const note = stream.declaration.note ? ` · ${stream.declaration.note}` : '';
    setText(stageAbout, `${stream.shape.summary}${note}`);
    recovery.show(stream.shape);
  }
  if (stream.version === stageVersion) return;
  stageVersion = stream.version;
  const latest = stream.latest;
  renderFlags(stageFlags, latest?.flags ?? [], flagSeverity, flagLabel);
  if (latest) recovery.draw(latest);
  trends.draw(stream, store.ledger);
}

watch.start();
pollDaemonStreams(`/v1/streams${tokenQuery}`, DAEMON_VIEW_EVERY_MS, (view) => store.applyDaemonView(view));
requestAnimationFrame(frame);
