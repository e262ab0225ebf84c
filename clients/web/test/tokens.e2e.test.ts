/**
 * The dashboard on a daemon that requires access tokens, in headless Chromium: with a watch
 * token in the address (`?token=`) the page subscribes, shows exactly the streams the token's
 * patterns cover and gets the daemon's stream figures; without one it says it is disconnected
 * and keeps retrying, never showing a stream.
 */
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { type RunningDaemon, startDaemon } from '../../../daemon/index.js';
import { createFeed, runFeed } from '../../feeds/index.js';
import { Producer } from '../../index.js';
import { buildDashboard, WEB_DIR } from '../build.js';
import { BROWSER_TEST_TIMEOUT_MS, collectPageErrors, launchChromium, missingChromium, SKIP_NOTE, withFailureShot } from './browser.js';

const PRODUCE_TOKEN = 'front-end-7f3a';
const WATCH_TOKEN = 'gearbox-watch-91c2';

describe.skipIf(missingChromium !== null)('dashboard with access tokens' + SKIP_NOTE, () => {
  let daemon: RunningDaemon;
  let producer: Producer;
  let browser: Browser;
  const stop = new AbortController();
  const runs: Promise<number>[] = [];
  const gearbox = createFeed('gearbox');
  const telemetry = createFeed('telemetry');

  beforeAll(async () => {
    await buildDashboard();
    daemon = await startDaemon({
      port: 0,
      stateDir: null,
      workers: 1,
      logLevel: 'silent',
      staticDir: WEB_DIR,
      tokens: [
        { token: PRODUCE_TOKEN, roles: ['produce'], name: 'feeds' },
        { token: WATCH_TOKEN, roles: ['watch'], streams: ['gearbox.*'], name: 'gearbox screen' },
      ],
    });
    producer = new Producer({ url: daemon.url, token: PRODUCE_TOKEN });
    await producer.connect();
    for (const feed of [gearbox, telemetry]) {
      const stream = await producer.declare(feed.declaration);
      runs.push(runFeed(feed, stream, { signal: stop.signal }));
    }
    browser = await launchChromium();
  }, BROWSER_TEST_TIMEOUT_MS);

  afterAll(async () => {
    stop.abort();
    await Promise.all(runs);
    await browser?.close();
    await producer?.close().catch(() => undefined);
    await daemon?.close('test finished');
  }, BROWSER_TEST_TIMEOUT_MS);

  it('shows the streams its token covers, with the token taken from the address', async () => {
    const page = await browser.newPage({ viewport: { width: 1300, height: 900 } });
    const errors = collectPageErrors(page);
    await withFailureShot(page, 'dashboard-tokens', async () => {
      await page.goto(`${daemon.url}/?token=${WATCH_TOKEN}`);
      await page.waitForSelector('body[data-link="live"], body[data-link="behind"]');
      await page.waitForFunction(() => Number(document.querySelector<HTMLElement>('#roster > li')?.dataset.results) > 3);
      // The token covers gearbox.* only: the telemetry stream stays out of sight.
      expect(await page.$$eval('#roster > li', (lis) => lis.map((li) => li.dataset.stream))).toEqual([gearbox.declaration.name]);
      // GET /v1/streams took the same token: the daemon's drop count is shown, not a dash.
      await page.waitForFunction(() => /^\d+$/.test(document.querySelector('#roster > li dl div:nth-child(4) dd')?.textContent ?? ''));
      expect(errors).toEqual([]);
    });
    await page.close();
  }, BROWSER_TEST_TIMEOUT_MS);

  it('says it is disconnected and keeps retrying without a token', async () => {
    const page = await browser.newPage({ viewport: { width: 1300, height: 900 } });
    const errors = collectPageErrors(page);
    await withFailureShot(page, 'dashboard-no-token', async () => {
      await page.goto(`${daemon.url}/`);
      // Refused again and again (the WebSocket upgrade is answered with 401), and still trying.
      await page.waitForFunction(() => /^disconnected \(connection failed or refused\) · retry [3-9] in \d+ s$/.test(document.getElementById('link-text')?.textContent ?? ''));
      expect(await page.$eval('body', (b) => b.dataset.link)).toBe('waiting');
      expect(await page.$eval('#recovery', (e) => (e as HTMLElement).hidden)).toBe(true);
      expect(await page.$$eval('#roster > li', (lis) => lis.length)).toBe(0);
      // The browser reports each refused connection and each refused poll; nothing else may fail.
      expect(errors.filter((e) => !/\b401\b|WebSocket connection to .* failed/.test(e))).toEqual([]);
    });
    await page.close();
  }, BROWSER_TEST_TIMEOUT_MS);
});
