/**
 * End to end: `sparsewire demo` (a real daemon with its worker pool, fed by the three synthetic
 * feeds through the client library) and the dashboard it serves, in headless Chromium.
 *
 * - the page loads and lists the demo's streams, and their results keep coming;
 * - the delay-Doppler map's strongest cell is the strongest reflector the range feed placed in
 *   the very frame the map shows (the feed is deterministic: a twin of it, stepped to that
 *   frame, gives its truth), and the reflector is seen to move;
 * - the demo's injected noise burst shows as an alert in the ledger, on the frame the demo's
 *   own subscriber reported;
 * - screenshots go to artifacts/.
 */
import { type ChildProcess, spawn } from 'node:child_process';
import { dirname, join } from 'node:path';
import { createInterface } from 'node:readline';
import { fileURLToPath } from 'node:url';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createFeed, FEED_KINDS, type RangeFeed } from '../../feeds/index.js';
import { buildDashboard } from '../build.js';
import { ARTIFACTS_DIR, BROWSER_TEST_TIMEOUT_MS, collectPageErrors, launchChromium, missingChromium, SKIP_NOTE, withFailureShot } from './browser.js';

const REPO = join(dirname(fileURLToPath(import.meta.url)), '..', '..', '..');
/** The demo bursts one feed (in the order gearbox, range, telemetry) this often, in seconds. */
const BURST_EVERY_S = 4;

/** The strongest reflector of the range feed's frame `seq` (the demo sends frame i as seq i). */
class RangeTruth {
  private readonly twin = createFeed('range') as RangeFeed;

  strongestAt(seq: number): { delay: number; doppler: number } {
    if (this.twin.frameCount > seq + 1) throw new Error(`frame ${seq} has passed; ask in increasing order`);
    while (this.twin.frameCount < seq + 1) this.twin.next();
    const strongest = this.twin.reflectors().reduce((a, b) => (Math.hypot(b.re, b.im) > Math.hypot(a.re, a.im) ? b : a));
    return { delay: strongest.delay, doppler: strongest.doppler };
  }
}

/** The demo as a child process, with the lines it printed. */
class DemoProcess {
  readonly lines: string[] = [];
  readonly child: ChildProcess;
  readonly exited: Promise<number | null>;

  constructor() {
    this.child = spawn(
      process.execPath,
      ['bin/sparsewire.js', 'demo', '--port', '0', '--for', '120', '--burst-every', String(BURST_EVERY_S), '--status-every', '0'],
      { cwd: REPO, stdio: ['ignore', 'pipe', 'pipe'] },
    );
    createInterface({ input: this.child.stdout! }).on('line', (line) => this.lines.push(line));
    createInterface({ input: this.child.stderr! }).on('line', (line) => this.lines.push(`stderr: ${line}`));
    this.exited = new Promise((resolve) => this.child.once('exit', (code) => resolve(code)));
  }

  /** The first printed line matching `pattern` (waits for it, up to `timeoutMs`). */
  async line(pattern: RegExp, timeoutMs = 60_000): Promise<RegExpMatchArray> {
    const started = Date.now();
    for (;;) {
      for (const line of this.lines) {
        const match = line.match(pattern);
        if (match) return match;
      }
      if (this.child.exitCode !== null) throw new Error(`the demo exited (${this.child.exitCode}):\n${this.lines.join('\n')}`);
      if (Date.now() - started > timeoutMs) throw new Error(`no line matching ${pattern} from the demo:\n${this.lines.join('\n')}`);
      await new Promise((r) => setTimeout(r, 50));
    }
  }

  async stop(): Promise<void> {
    if (this.child.exitCode !== null) return;
    this.child.kill('SIGINT'); // the demo stops gracefully on SIGINT
    const killer = setTimeout(() => this.child.kill('SIGKILL'), 15_000);
    await this.exited;
    clearTimeout(killer);
  }
}

describe.skipIf(missingChromium !== null)('dashboard on the demo, in headless Chromium' + SKIP_NOTE, () => {
  let demo: DemoProcess;
  let browser: Browser;

  beforeAll(async () => {
    await buildDashboard();
    [browser, demo] = await Promise.all([launchChromium(), Promise.resolve(new DemoProcess())]);
  }, BROWSER_TEST_TIMEOUT_MS);

  afterAll(async () => {
    await browser?.close();
    await demo?.stop();
  });

  it('lists the demo streams, follows the moving reflector, and shows the burst alert', async () => {
    const url = (await demo.line(/^dashboard: (\S+)$/))[1]!;
    const page = await browser.newPage({ viewport: { width: 1500, height: 1000 } });
    const errors = collectPageErrors(page);
    await withFailureShot(page, 'dashboard-demo', async () => {
      const rangeName = createFeed('range').declaration.name;
      await page.goto(`${url}#stream=${rangeName}`);

      // The page loads and lists the three demo streams.
      await page.waitForSelector('body[data-link="live"], body[data-link="behind"]');
      const demoStreams = FEED_KINDS.map((kind) => createFeed(kind).declaration.name);
      await page.waitForFunction((n) => document.querySelectorAll('#roster > li').length === n, demoStreams.length);
      const listed = await page.$$eval('#roster > li', (lis) => lis.map((li) => li.dataset.stream));
      expect([...listed].sort()).toEqual([...demoStreams].sort());

      // Live updates: every stream's result count keeps growing.
      const counts = () =>
        page.$$eval('#roster > li', (lis) => Object.fromEntries(lis.map((li) => [li.dataset.stream!, Number(li.dataset.results)])));
      const first = await counts();
      await page.waitForFunction(
        (before) => Array.from(document.querySelectorAll<HTMLElement>('#roster > li')).every((li) => Number(li.dataset.results) > (before[li.dataset.stream!] ?? 0) + 2),
        first,
        { timeout: 45_000 },
      );

      // The strongest cell of the drawn frame is the feed's strongest reflector in that frame.
      // Frames flagged residual_high (a noise burst on this stream) are not compared: the feed's
      // truth is the noiseless scene, and what a burst does to the map is the alert's business.
      const truth = new RangeTruth();
      const seen = new Map<number, { delay: number; doppler: number }>();
      const started = Date.now();
      let delays = new Set<number>();
      const looked: unknown[] = []; // everything read, for the failure message
      while ((seen.size < 8 || delays.size < 2) && Date.now() - started < 60_000) {
        const shown = await page.evaluate(() => {
          const heat = document.getElementById('heat') as HTMLCanvasElement;
          const flags = document.getElementById('stage-flags')!.dataset.flags ?? '';
          return { seq: heat.dataset.peakSeq, delay: heat.dataset.peakDelay, doppler: heat.dataset.peakDoppler, flags };
        });
        looked.push(shown);
        if (shown.seq !== undefined && shown.delay !== undefined && !shown.flags.split(' ').includes('residual_high')) {
          const seq = Number(shown.seq);
          if (!seen.has(seq) && seq >= Math.max(-1, ...seen.keys())) {
            const drawn = { delay: Number(shown.delay), doppler: Number(shown.doppler) };
            expect(drawn, `frame ${seq}`).toEqual(truth.strongestAt(seq));
            seen.set(seq, drawn);
            delays = new Set([...seen.values()].map((c) => c.delay));
          }
        }
        await page.waitForTimeout(250);
      }
      expect(seen.size, JSON.stringify(looked.slice(-20))).toBeGreaterThanOrEqual(8);
      // The strongest reflector creeps one delay bin every 60 frames (6 s at 10 frames/s).
      expect(delays.size).toBeGreaterThanOrEqual(2);
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-demo-delay-doppler.png') });

      // The demo's first noise burst (on the gearbox stream) raises an alert: the ledger shows it
      // on the frame the demo's own subscriber reported, and the roster marks the stream.
      const raised = await demo.line(/^alert raised: (\S+) at #(\d+),/);
      const [, stream, seq] = raised;
      await page.waitForSelector(`#ledger > li[data-state="raised"][data-stream="${stream}"][data-seq="${seq}"]`);
      expect(demo.lines.some((l) => l.startsWith(`noise burst on ${stream}`))).toBe(true);
      await page.click(`#roster > li[data-stream="${stream}"]`);
      await page.waitForFunction((name) => document.getElementById('stage-title')?.textContent === name, stream);
      await page.waitForTimeout(500); // let a few frames draw before the picture
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-demo-alert.png') });

      expect(await page.$eval('#footnote', (e) => e.textContent)).not.toMatch(/not understood/);
      expect(errors).toEqual([]);
    });
    await page.close();
  }, BROWSER_TEST_TIMEOUT_MS);
});
