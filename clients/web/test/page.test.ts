/**
 * The dashboard in headless Chromium against a scripted daemon: a loopback HTTP + WebSocket
 * server that serves the built page and speaks the watch side of the protocol (protocol/) with
 * results whose content the test chose. Checks what the page must show — the stream roster,
 * the strongest delay-Doppler cell of the very frame it displays, alerts, the behind and
 * disconnected states — and that it comes back by itself. The end-to-end test against the
 * real demo is demo.e2e.test.ts.
 */
import { createReadStream } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { extname, join, normalize, sep } from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { type WebSocket, WebSocketServer } from 'ws';
import { float64ToBin, uint32ToBin } from '../../../protocol/bin.js';
import { decode, encode } from '../../../protocol/codec.js';
import type { DaemonToSubscriber, ResultMessage, StreamDeclaration } from '../../../protocol/messages.js';
import { buildDashboard, WEB_DIR } from '../build.js';
import { columnOfCell, type DelayDopplerGrid } from '../src/delay-doppler.js';
import { ARTIFACTS_DIR, BROWSER_TEST_TIMEOUT_MS, collectPageErrors, launchChromium, missingChromium, SKIP_NOTE, withFailureShot } from './browser.js';

const TOKEN = 'watch-token-1';
const GRID: DelayDopplerGrid = { delays: 16, dopplerFrom: -4, dopplerTo: 11 };

const channel: StreamDeclaration = {
  name: 'range-2.channel',
  operator: { kind: 'gabor', n: 16, window: { kind: 'steinhaus', seed: 3 }, grid: GRID },
  solver: { method: 'omp' },
};
const tones: StreamDeclaration = {
  name: 'stand-1.vibration',
  operator: { kind: 'sampling', n: 128, samples: { law: 'explicit', indices: [40, 3, 17, 41, 120, 90, 101, 77] }, basis: { kind: 'dft' } },
  solver: { method: 'fista' },
  alerts: [{ metric: 'relative_residual', above: 0.2, clear_below: 0.1, k: 2, of: 3 }],
};
const telemetry: StreamDeclaration = {
  name: 'link-7.telemetry',
  operator: { kind: 'gaussian', rows: 24, cols: 64, seed: 9, basis: { kind: 'haar' } },
  solver: { method: 'fista' },
};

/** Where the scripted reflector sits in frame `seq`: it moves one delay bin every 10 frames. */
function reflectorAt(seq: number): { delay: number; doppler: number } {
  return { delay: (5 + Math.floor(seq / 10)) % GRID.delays, doppler: 3 };
}

function sparse(columns: number[], magnitudes: number[]) {
  const values = new Float64Array(2 * columns.length);
  magnitudes.forEach((m, i) => {
    values[2 * i] = m * Math.cos(i); // any phase: the page draws magnitudes
    values[2 * i + 1] = m * Math.sin(i);
  });
  return { indices: uint32ToBin(Uint32Array.from(columns)), values: float64ToBin(values) };
}

function result(stream: string, seq: number, extra: Partial<ResultMessage>): ResultMessage {
  const now = Date.now();
  return {
    v: 1,
    type: 'result',
    stream,
    seq,
    time: now - 20,
    solved_at: now - 2,
    flags: [],
    evidence: {
      relative_residual: 0.02 + 0.01 * Math.sin(seq / 5),
      residual: 0.1,
      iterations: 12 + (seq % 5),
      certificate_kind: 'duality_gap',
      certificate: 1e-6,
      converged: true,
      support_size: 3,
      added: 0,
      removed: 0,
      recoverability: 'safe',
      solve_ms: 1.5,
    },
    ...extra,
  };
}

/** While true, the channel's frames come back empty: nothing recovered, so no `coefficients`. */
let channelEmpty = false;

function channelResult(seq: number): DaemonToSubscriber {
  if (channelEmpty) {
    const empty = result(channel.name, seq, {});
    empty.evidence.support_size = 0;
    return empty;
  }
  const peak = reflectorAt(seq);
  const columns = [columnOfCell(GRID, peak.delay, peak.doppler), columnOfCell(GRID, 9, -2), columnOfCell(GRID, 12, 7)];
  return result(channel.name, seq, { coefficients: sparse(columns, [2, 1.1, 0.6]) });
}

function tonesResult(seq: number, flags: string[] = []): DaemonToSubscriber {
  const n = 128;
  const bins = [10, 37];
  const amplitudes = [1, 0.5];
  const signal = new Float64Array(2 * n);
  for (let t = 0; t < n; t++) {
    for (let i = 0; i < bins.length; i++) {
      // Unitary inverse DFT of the two coefficients.
      const phase = (2 * Math.PI * bins[i]! * t) / n;
      signal[2 * t] += (amplitudes[i]! * Math.cos(phase)) / Math.sqrt(n);
      signal[2 * t + 1] += (amplitudes[i]! * Math.sin(phase)) / Math.sqrt(n);
    }
  }
  // The measurements: the signal at the listed sample times, in the listed order.
  const times = (tones.operator as { samples: { indices: number[] } }).samples.indices;
  const y = new Float64Array(2 * times.length);
  times.forEach((t, i) => {
    y[2 * i] = signal[2 * t]!;
    y[2 * i + 1] = signal[2 * t + 1]!;
  });
  return result(tones.name, seq, { flags, coefficients: sparse(bins, amplitudes), signal: float64ToBin(signal), y: float64ToBin(y) });
}

function telemetryResult(seq: number): DaemonToSubscriber {
  const signal = new Float64Array(2 * 64);
  for (let t = 0; t < 64; t++) signal[2 * t] = t < 20 ? 1 : t < 45 ? -0.5 : 0.25;
  return result(telemetry.name, seq, { coefficients: sparse([0, 1, 5], [0.4, 1.2, 0.7]), signal: float64ToBin(signal) });
}

const CONTENT_TYPES: Record<string, string> = { '.html': 'text/html', '.js': 'text/javascript', '.css': 'text/css', '.map': 'application/json' };

describe.skipIf(missingChromium !== null)('dashboard page against a scripted daemon' + SKIP_NOTE, () => {
  let server: Server;
  let wss: WebSocketServer;
  let browser: Browser;
  let base: string;
  let pump: ReturnType<typeof setInterval>;
  let seq = 0; // the channel and telemetry streams
  let tonesSeq = 0;
  const subscribers = new Set<WebSocket>();
  let subscriptions = 0;
  const subscribeRequests: unknown[] = [];

  beforeAll(async () => {
    // Served the way the daemon serves it: the clients/web folder, with the fresh bundle in dist/.
    await buildDashboard();
    server = createServer((req, res) => {
      const url = new URL(req.url ?? '/', 'http://x');
      const path = url.pathname;
      if (path === '/v1/streams') {
        // The daemon's figures (docs/daemon.md): the channel's producer ignored credit twice and
        // the queue dropped a frame; the telemetry producer went away.
        if (url.searchParams.get('token') !== TOKEN) return void res.writeHead(401).end();
        res.writeHead(200, { 'content-type': 'application/json' });
        return void res.end(
          JSON.stringify({
            streams: [
              { name: tones.name, state: 'open', producer_connected: true, queue_depth: 0, frames: { received: 9, refused: 0, dropped: 0, solved: 9 } },
              { name: channel.name, state: 'open', producer_connected: true, queue_depth: 2, frames: { received: 9, refused: 2, dropped: 1, solved: 6 } },
              { name: telemetry.name, state: 'open', producer_connected: false, queue_depth: 0, frames: { received: 9, refused: 0, dropped: 0, solved: 9 } },
            ],
          }),
        );
      }
      const file = normalize(join(WEB_DIR, path === '/' ? 'index.html' : path));
      if (!file.startsWith(WEB_DIR + sep)) return void res.writeHead(403).end();
      const stream = createReadStream(file);
      stream.on('open', () => res.writeHead(200, { 'content-type': CONTENT_TYPES[extname(file)] ?? 'application/octet-stream' }));
      stream.on('error', () => res.writeHead(404).end());
      stream.pipe(res);
    });
    wss = new WebSocketServer({ noServer: true });
    server.on('upgrade', (req, socket, head) => {
      const url = new URL(req.url ?? '/', 'http://x');
      if (url.pathname !== '/v1/watch' || url.searchParams.get('token') !== TOKEN) {
        socket.end('HTTP/1.1 401 Unauthorized\r\n\r\n');
        return;
      }
      wss.handleUpgrade(req, socket, head, (ws) => {
        ws.on('message', (data) => {
          const message = decode(new Uint8Array(data as Buffer));
          if (message.type !== 'subscribe') return;
          subscribeRequests.push(message);
          subscriptions++;
          ws.send(encode({ v: 1, type: 'subscribed', ref: message.ref, id: `s${subscriptions}`, streams: [tones, channel, telemetry] }));
          subscribers.add(ws);
        });
        ws.on('close', () => subscribers.delete(ws));
      });
    });
    await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
    base = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
    pump = setInterval(() => {
      seq++;
      for (const ws of subscribers) {
        ws.send(encode(channelResult(seq)));
        ws.send(encode(tonesResult(++tonesSeq)));
        ws.send(encode(telemetryResult(seq)));
      }
    }, 50);
    browser = await launchChromium();
  }, BROWSER_TEST_TIMEOUT_MS);

  afterAll(async () => {
    clearInterval(pump);
    await browser?.close();
    for (const ws of subscribers) ws.terminate();
    await new Promise((r) => wss?.close(r));
    await new Promise((r) => server?.close(r));
  });

  function broadcast(message: DaemonToSubscriber): void {
    for (const ws of subscribers) ws.send(encode(message));
  }

  it('lists the streams, draws the frame it names, shows alerts, falling behind, and a lost link', async () => {
    const page = await browser.newPage({ viewport: { width: 1500, height: 1000 } });
    const errors = collectPageErrors(page);
    await withFailureShot(page, 'dashboard-scripted', async () => {
      await page.goto(`${base}/?token=${TOKEN}#stream=${channel.name}`);

      // The roster lists every declared stream, and results keep arriving.
      await page.waitForSelector('body[data-link="live"]');
      await page.waitForFunction(() => document.querySelectorAll('#roster > li').length === 3);
      const names = await page.$$eval('#roster > li', (lis) => lis.map((li) => li.dataset.stream));
      expect(names).toEqual([tones.name, channel.name, telemetry.name]);
      const countOf = () => page.$eval(`#roster > li[data-stream="${channel.name}"]`, (li) => Number(li.dataset.results));
      const before = await countOf();
      await page.waitForFunction((n) => Number(document.querySelector('#roster > li[data-stream="range-2.channel"]')?.getAttribute('data-results')) > n + 5, before);
      expect(subscribeRequests[0]).toMatchObject({ when_behind: 'keep_latest', streams: '*' });
      // The daemon's own figures reach the roster.
      await page.waitForFunction(() => document.querySelector('#roster > li[data-stream="link-7.telemetry"] .roster-note')?.textContent === 'no producer connected');
      const channelFigures = await page.$$eval('#roster > li[data-stream="range-2.channel"] dl div', (divs) =>
        Object.fromEntries(divs.map((d) => [d.querySelector('dt')!.textContent, d.querySelector('dd')!.textContent])),
      );
      expect(channelFigures).toMatchObject({ drops: '3', alerts: '0', missed: '0' });
      expect(channelFigures.rate).toMatch(/^\d+\.\d\/s$/);

      // The heat map's strongest cell is the reflector of the very frame the map says it shows.
      for (let check = 0; check < 5; check++) {
        const shown = await page.$eval('#heat', (c) => ({ ...(c as HTMLCanvasElement).dataset }));
        expect(shown.peakSeq).toBeDefined();
        const expected = reflectorAt(Number(shown.peakSeq));
        expect({ delay: Number(shown.peakDelay), doppler: Number(shown.peakDoppler) }).toEqual(expected);
        await page.waitForTimeout(120);
      }
      // The drawn pixels agree: the ringed cell is the darkest on the map. Sample the canvas at the
      // cell's centre and at another nonzero cell's centre.
      const darkness = await page.$eval('#heat', (canvas) => {
        const c = canvas as HTMLCanvasElement;
        const ctx = c.getContext('2d')!;
        const ratio = window.devicePixelRatio || 1;
        const left = 44, top = 8, plotW = c.clientWidth - 44 - 8 - 46, plotH = c.clientHeight - 30 - 8; // heat-map.ts layout
        const delay = Number(c.dataset.peakDelay), doppler = Number(c.dataset.peakDoppler);
        const at = (k: number, l: number) => {
          const x = (left + (k + 0.5) * (plotW / 16)) * ratio;
          const y = (top + (16 - 1 - (l + 4) + 0.5) * (plotH / 16)) * ratio;
          const [r, g, b] = ctx.getImageData(Math.round(x), Math.round(y), 1, 1).data;
          return r! + g! + b!;
        };
        return { peak: at(delay, doppler), other: at(9, -2), empty: at(0, 0) };
      });
      expect(darkness.peak).toBeLessThan(darkness.other);
      expect(darkness.other).toBeLessThan(darkness.empty);
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-scripted-delay-doppler.png') });

      // A frame with nothing recovered empties the map instead of leaving the last one up.
      channelEmpty = true;
      await page.waitForFunction(() => /no nonzero coefficients/.test(document.getElementById('recovery-readout')?.textContent ?? ''));
      expect(await page.$eval('#heat', (c) => (c as HTMLCanvasElement).dataset.peakDelay)).toBeUndefined();
      channelEmpty = false;
      await page.waitForFunction(() => (document.getElementById('heat') as HTMLCanvasElement).dataset.peakDelay !== undefined);

      // An alert raised on a frame shows in the ledger with that frame, and on the roster.
      const raisedAt = ++tonesSeq;
      broadcast(tonesResult(raisedAt, ['residual_high']));
      broadcast({ v: 1, type: 'alert', stream: tones.name, seq: raisedAt, rule: 0, metric: 'relative_residual', state: 'raised', value: 0.31, limit: 0.2 });
      await page.waitForSelector(`#ledger li[data-state="raised"][data-seq="${raisedAt}"][data-stream="${tones.name}"]`);
      await page.waitForSelector(`#roster > li[data-stream="${tones.name}"][data-health="alerting"]`);

      // The spectral stream's view: magnitude by frequency bin, and the waveform beside it.
      await page.click(`#roster > li[data-stream="${tones.name}"]`);
      await page.waitForFunction(() => document.getElementById('stage-title')?.textContent === 'stand-1.vibration');
      expect(await page.$eval('#recovery-caption', (e) => e.textContent)).toMatch(/frequency/);
      expect(await page.$eval('#recovery-side', (e) => (e as HTMLElement).hidden)).toBe(false);
      await page.waitForFunction(() => /8 measured samples shown/.test(document.getElementById('recovery-readout')?.textContent ?? ''));
      expect(subscribeRequests[0]).toMatchObject({ want: expect.arrayContaining(['coefficients', 'signal', 'measurements', 'alerts']) });
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-scripted-spectrum.png') });

      // A daemon that reports results passed over for this page: the badge says "behind".
      broadcast({ v: 1, type: 'missed', stream: tones.name, from_seq: tonesSeq + 1, to_seq: tonesSeq + 40, count: 40, reason: 'subscriber_behind' });
      tonesSeq += 40;
      await page.waitForSelector('body[data-link="behind"]');

      // The link drops: the page says so, then reconnects and subscribes again by itself.
      const subscribedBefore = subscriptions;
      for (const ws of subscribers) ws.terminate();
      await page.waitForSelector('body[data-link="waiting"], body[data-link="connecting"]');
      await page.waitForFunction(() => /disconnected|connecting/.test(document.getElementById('link-text')?.textContent ?? ''));
      await page.waitForSelector('body[data-link="live"], body[data-link="behind"]');
      expect(subscriptions).toBe(subscribedBefore + 1);

      expect(await page.$eval('#footnote', (e) => e.textContent)).not.toMatch(/not understood/);
      expect(errors).toEqual([]);
    });
    await page.close();
  }, BROWSER_TEST_TIMEOUT_MS);
});
