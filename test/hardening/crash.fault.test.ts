import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync, statSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { Producer, Subscriber } from '../../clients/index.js';
import { readRecording } from '../../clients/recording/index.js';
import { eventually } from '../../daemon/test/helpers.js';
import { dftStream } from '../../daemon/test/synthetic.js';
import type { MissedMessage } from '../../protocol/index.js';
import { DaemonProcess, REPO_ROOT } from './support/daemonProcess.js';
import { byScale, recordFigures } from './support/scale.js';

// SIGKILL in the middle of a recorded session (docs/recording.md, "Crash safety"; docs/daemon.md,
// "Persistence"): `sparsewire serve` is killed while a producer sends and `sparsewire record`
// writes, then restarted on the same port and state directory; later the recorder itself is
// killed mid-write. Oracles: the restarted daemon knows the stream again; every frame the producer
// sent is published or announced as missed (nothing vanishes silently); the recording's valid
// prefix reads back, in order, and the only damage a kill can leave is a torn last record.

const FRAMES = byScale({ ci: 120, report: 600, soak: 3000 });
const fastBackoff = { initialMs: 50, maxMs: 400 };

/** Processes and files this suite made, removed whatever happens in the test. */
const cleanups: Array<() => void | Promise<unknown>> = [];
afterEach(async () => {
  for (const cleanup of cleanups.splice(0).reverse()) await cleanup();
});

describe('SIGKILL mid-recording', () => {
  it('the daemon killed and restarted, then the recorder killed: the recording’s valid prefix reads back and nothing vanished', async () => {
    const dir = mkdtempSync(path.join(os.tmpdir(), 'sparsewire-crash-'));
    cleanups.push(() => rmSync(dir, { recursive: true, force: true }));
    const stateDir = path.join(dir, 'state');
    const file = path.join(dir, 'session.swrec');
    const serveArgs = ['--state-dir', stateDir, '--no-static', '--workers', '1', '--log-level', 'warn'];
    let daemon = await DaemonProcess.serve(['--port', '0', ...serveArgs]);
    cleanups.push(() => daemon.stop());
    const port = daemon.port;

    const recorder = spawn(process.execPath, [path.join(REPO_ROOT, 'bin', 'sparsewire.js'), 'record', '--daemon', daemon.url, '--out', file, '--streams', 'crash.*'], {
      cwd: REPO_ROOT,
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    cleanups.push(() => {
      if (recorder.exitCode === null && recorder.signalCode === null) recorder.kill('SIGKILL');
    });
    let recorderLog = '';
    recorder.stderr.on('data', (c: Buffer) => (recorderLog += c.toString()));
    const recorderExit = new Promise<NodeJS.Signals | null>((resolve) => recorder.once('exit', (_code, signal) => resolve(signal)));
    await eventually(() => recorderLog.includes('recording'), 'the recorder to start', 30_000);

    const feed = dftStream(256, 64);
    const subscriber = new Subscriber({ url: daemon.url, backoff: fastBackoff });
    cleanups.push(() => subscriber.close());
    const seen = new Set<number>();
    const missed: MissedMessage[] = [];
    subscriber.on('result', (r) => seen.add(r.seq));
    subscriber.on('missed', (m) => missed.push(m));
    await subscriber.connect();
    await subscriber.subscribe({ streams: 'crash.*', want: ['quality'], whenBehind: 'drop_with_notice' });
    const producer = new Producer({ url: daemon.url, backoff: fastBackoff });
    cleanups.push(() => producer.close());
    await producer.connect();
    const stream = await producer.declare({ name: 'crash.s', operator: feed.operator, solver: { method: 'lasso' } });
    const pumping = (async () => {
      for (let k = 0; k < FRAMES; k++) {
        await stream.send(feed.measurements(k));
        await new Promise((r) => setTimeout(r, 4));
      }
    })();

    // Kill the daemon once a third of the session has been published, and start it again.
    await eventually(() => seen.size >= FRAMES / 3, 'a third of the results', 60_000);
    const bytesBeforeKill = statSync(file).size;
    daemon.kill('SIGKILL');
    expect((await daemon.exited).signal).toBe('SIGKILL');
    daemon = await DaemonProcess.serve(['--port', String(port), ...serveArgs]);
    const restored = (await (await fetch(`${daemon.url}/v1/streams`)).json()) as { streams: Array<{ name: string }> };
    expect(restored.streams.map((s) => s.name)).toContain('crash.s');

    // Kill the recorder while results are still being written.
    await eventually(() => seen.size >= (2 * FRAMES) / 3, 'two thirds of the results', 60_000);
    await eventually(() => statSync(file).size > bytesBeforeKill, 'the recorder writing again after the restart', 60_000);
    recorder.kill('SIGKILL');
    expect(await recorderExit).toBe('SIGKILL');

    await pumping;
    await stream.drained();
    const announced = () => missed.reduce((set, m) => {
      for (let s = m.from_seq; s <= m.to_seq; s++) set.add(s);
      return set;
    }, new Set<number>());
    await eventually(() => [...Array(FRAMES).keys()].every((s) => seen.has(s) || announced().has(s)), 'every frame published or announced', 60_000);
    const silentlyLost = [...Array(FRAMES).keys()].filter((s) => !seen.has(s) && !announced().has(s));
    expect(silentlyLost).toEqual([]);
    await producer.close();
    await subscriber.close();
    await daemon.stop();

    // The recording: header intact, records in order, at most a torn last record.
    expect(existsSync(file)).toBe(true);
    const recording = readRecording(file);
    if (recording.damage) {
      expect(recording.damage.kind).toBe('torn');
      expect(recording.damage.offset + recording.damage.bytes).toBe(recording.size);
    }
    const results = recording.entries.filter((e) => e.message.type === 'result').map((e) => (e.message as { seq: number }).seq);
    expect(results.length).toBeGreaterThan(FRAMES / 3);
    for (let i = 1; i < results.length; i++) expect(results[i]!).toBeGreaterThan(results[i - 1]!);
    const frames = recording.entries.filter((e) => e.message.type === 'frame').length;
    expect(frames).toBeGreaterThan(0);
    recordFigures('crash: SIGKILL of the daemon and of the recorder mid-session', {
      frames_sent: FRAMES,
      daemon_kills: 1,
      recorder_kills: 1,
      stream_restored: 1,
      results_published: seen.size,
      announced_missed: announced().size,
      silently_lost: silentlyLost.length,
      recording_bytes: recording.size,
      records_read_back: recording.entries.length,
      recorded_results: results.length,
      torn_tail_bytes: recording.damage?.bytes ?? 0,
    });
  });
});
