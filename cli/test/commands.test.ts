import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { GearboxFeed } from '../../clients/feeds/index.js';
import { EXIT } from '../exitCodes.js';
import { CliProcess, runCli } from './processes.js';

/**
 * Every command run as a process against a daemon started with `sparsewire serve` on an
 * ephemeral loopback port.
 */
let daemon: CliProcess;
let url: string;
const dir = mkdtempSync(join(tmpdir(), 'sparsewire-cli-'));

beforeAll(async () => {
  daemon = new CliProcess(['serve', '--port', '0', '--no-state', '--no-static', '--workers', '1', '--log-level', 'warn']);
  url = (await daemon.waitFor(/sparsewire listening on (http:\/\/\S+)/))[1]!;
});

afterAll(async () => {
  daemon.signal('SIGTERM');
  const { code } = await daemon.finished;
  rmSync(dir, { recursive: true, force: true });
  expect(code).toBe(EXIT.ok);
});

describe('send and watch', () => {
  it('send delivers a synthetic feed and waits for every acknowledgement', async () => {
    const r = await runCli(['send', '--daemon', url, '--feed', 'range', '--name', 'cli.range', '--frames', '12', '--rate', '0', '--close']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(EXIT.ok);
    expect(r.stdout).toMatch(/sent 12 frames to cli\.range: 12 solved, 0 dropped by the queue policy, 0 refused/);
  });

  it('send reads a JSON-lines frame file and names a bad line', async () => {
    const feed = new GearboxFeed({ name: 'cli.file' });
    const lines = [JSON.stringify(feed.declaration)];
    for (let f = 0; f < 6; f++) lines.push(JSON.stringify({ y: Array.from(feed.next()), time: 1000 + 50 * f }));
    const good = join(dir, 'frames.jsonl');
    writeFileSync(good, lines.join('\n') + '\n');
    const r = await runCli(['send', '--daemon', url, '--file', good, '--close']);
    expect(r.code).toBe(EXIT.ok);
    expect(r.stdout).toMatch(/sent 6 frames to cli\.file: 6 solved/);
    const bad = join(dir, 'bad.jsonl');
    writeFileSync(bad, `${lines[0]}\n{"y": [1, 2, 3]}\n`);
    const rb = await runCli(['send', '--daemon', url, '--file', bad]);
    expect(rb.code).toBe(EXIT.usage);
    expect(rb.stderr).toMatch(/bad\.jsonl line 2: y must be a non-empty list/);
  });

  it('send fails with exit 1 and a clear message when no daemon listens', async () => {
    const r = await runCli(['send', '--daemon', 'http://127.0.0.1:9', '--feed', 'gearbox', '--frames', '1']);
    expect(r.code).toBe(EXIT.failure);
    expect(r.stderr).toMatch(/sparsewire send: .*ECONNREFUSED/);
  });

  it('watch --json prints one parseable object per result and stops at --count', async () => {
    const watch = new CliProcess(['watch', '--daemon', url, '--json', '--streams', 'cli.watch*', '--count', '8', '--top', '3']);
    await new Promise((r) => setTimeout(r, 1500)); // let it subscribe before frames flow
    const send = await runCli(['send', '--daemon', url, '--feed', 'telemetry', '--name', 'cli.watch', '--frames', '10', '--rate', '20', '--close']);
    expect(send.code).toBe(EXIT.ok);
    const { code, stdout } = await watch.finished;
    expect(code).toBe(EXIT.ok);
    const events = stdout.trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>);
    const results = events.filter((e) => e.event === 'result');
    expect(results).toHaveLength(8);
    expect(results.map((e) => e.seq)).toEqual([0, 1, 2, 3, 4, 5, 6, 7]);
    for (const e of results) {
      expect(e.stream).toBe('cli.watch');
      expect((e.top as unknown[]).length).toBe(3);
      expect(typeof e.lag_ms).toBe('number');
    }
    expect(events).toContainEqual(expect.objectContaining({ event: 'stream', change: 'declared', stream: 'cli.watch' }));
  });

  it('watch prints readable lines when not on a terminal', async () => {
    const watch = new CliProcess(['watch', '--daemon', url, '--streams', 'cli.lines', '--count', '3']);
    await new Promise((r) => setTimeout(r, 1500));
    await runCli(['send', '--daemon', url, '--feed', 'gearbox', '--name', 'cli.lines', '--frames', '4', '--rate', '20', '--close']);
    const { code, stdout } = await watch.finished;
    expect(code).toBe(EXIT.ok);
    expect(stdout).toMatch(/cli\.lines #0 {2}lag .* ms {2}rel\.residual \S+ {2}iterations \d+ {2}support \d+ \(\+\d+ -\d+\) {2}flags \S+ {2}top \d+:/);
  });
});

describe('record, inspect and replay', () => {
  const recording = join(dir, 'session.swrec');

  beforeAll(async () => {
    const record = new CliProcess(['record', '--daemon', url, '--out', recording, '--streams', 'rec.*', '--count', '50', '--note', 'cli test']);
    await record.waitFor(/recording \d+ streams/, 30_000, true);
    const [a, b] = await Promise.all([
      runCli(['send', '--daemon', url, '--feed', 'telemetry', '--name', 'rec.telemetry', '--frames', '25', '--rate', '25', '--burst-at', '8', '--burst-frames', '6']),
      runCli(['send', '--daemon', url, '--feed', 'gearbox', '--name', 'rec.gearbox', '--frames', '25', '--rate', '25']),
    ]);
    expect([a.code, b.code]).toEqual([EXIT.ok, EXIT.ok]);
    const { code, stdout } = await record.finished;
    expect(code).toBe(EXIT.ok);
    expect(stdout).toMatch(/recorded 50 frames, 50 results, 2 alerts/);
  });

  it('inspect summarises streams, frames, duration and a clean end', async () => {
    const r = await runCli(['inspect', recording]);
    expect(r.code).toBe(EXIT.ok);
    expect(r.stdout).toMatch(/note {7}cli test/);
    expect(r.stdout).toMatch(/rec\.telemetry +25 +25 +0-24 +0 +\S+ s +1\/1 +0/);
    expect(r.stdout).toMatch(/rec\.gearbox +25 +25 +0-24 +0/);
    expect(r.stdout).toMatch(/end {8}clean/);
    const json = JSON.parse((await runCli(['inspect', '--json', recording])).stdout) as { streams: Array<{ name: string; frames: number; durationMs: number }> };
    const telemetry = json.streams.find((s) => s.name === 'rec.telemetry')!;
    expect(telemetry.frames).toBe(25);
    // 25 frames at 25 per second: about 0.96 s from first to last.
    expect(telemetry.durationMs).toBeGreaterThan(500);
  });

  it('replay reproduces the recorded results bit for bit, on every pass', async () => {
    const r = await runCli(['replay', '--daemon', url, '--check', '--tolerance', '0', '--fast', '--loop', '2', recording]);
    expect(r.code).toBe(EXIT.ok);
    expect(r.stdout.match(/50 results compared, 50 agree, 0 differ, 0 missing/g)).toHaveLength(2);
  });

  it('replay at a speed factor keeps the recorded pace, scaled', async () => {
    const started = Date.now();
    const r = await runCli(['replay', '--daemon', url, '--speed', '4', '--prefix', 'paced.', recording]);
    expect(r.code).toBe(EXIT.ok);
    expect(r.stdout).toMatch(/at 4x the original pace/);
    // About 1 s of recording at 4x: at least a fifth of a second, whatever the machine's speed.
    expect(Date.now() - started).toBeGreaterThan(200);
  });

  it('replay --check fails with a diff summary when a solver setting changes', async () => {
    const r = await runCli(['replay', '--daemon', url, '--check', '--fast', '--set', 'solver.sparsity=2', recording]);
    expect(r.code).toBe(EXIT.regression);
    expect(r.stdout).toMatch(/check against the recording \(tolerance 1e-9\): 50 results compared, \d+ agree, [1-9]\d* differ/);
    expect(r.stdout).toMatch(/first differences:\n {2}rec\.\w+ #\d+: coefficients differ by \S+ \(relative\) at index \d+; support \+0 -\d+/);
    expect(r.stdout).toMatch(/check FAILED/);
  });

  it('a recording cut inside a record is reported with its intact prefix, which replays', async () => {
    const bytes = readFileSync(recording);
    const torn = join(dir, 'torn.swrec');
    writeFileSync(torn, bytes.subarray(0, bytes.length - 37));
    const inspect = await runCli(['inspect', torn]);
    expect(inspect.code).toBe(EXIT.damaged);
    expect(inspect.stdout).toMatch(/end {8}DAMAGED \(torn, \d+ bytes from byte \d+\): record \d+ at byte \d+: the file ends after \d+ of its \d+ bytes/);
    const replay = await runCli(['replay', '--daemon', url, '--check', '--tolerance', '0', '--fast', '--prefix', 'torn.', torn]);
    expect(replay.code).toBe(EXIT.ok);
    expect(replay.stderr).toMatch(/is damaged \(torn\).*\nreplaying the intact part/);
    expect(replay.stdout).toMatch(/check passed/);
  });

  it('a flipped byte is caught by the CRC; the records before it replay', async () => {
    const bytes = Buffer.from(readFileSync(recording));
    bytes[Math.floor(bytes.length / 2)]! ^= 0x04;
    const flipped = join(dir, 'flipped.swrec');
    writeFileSync(flipped, bytes);
    const inspect = await runCli(['inspect', flipped]);
    expect(inspect.code).toBe(EXIT.damaged);
    expect(inspect.stdout).toMatch(/DAMAGED \(corrupt, .*CRC mismatch \(stored 0x[0-9A-F]{8}, computed 0x[0-9A-F]{8}\)/);
    const replay = await runCli(['replay', '--daemon', url, '--check', '--tolerance', '0', '--fast', '--prefix', 'flipped.', flipped]);
    expect(replay.code).toBe(EXIT.ok);
    expect(replay.stdout).toMatch(/check passed/);
  });

  it('inspect and replay refuse a file that is not a recording with exit 4', async () => {
    const junk = join(dir, 'junk.swrec');
    writeFileSync(junk, 'not a recording at all');
    for (const args of [['inspect', junk], ['replay', '--daemon', url, junk]]) {
      const r = await runCli(args);
      expect(r.code).toBe(EXIT.damaged);
      expect(r.stderr).toMatch(/not a sparsewire recording/);
    }
  });
});
