import { startDaemon, type RunningDaemon } from '../daemon/index.js';
import { createFeed, FEED_KINDS, runFeed, type Feed } from '../clients/feeds/index.js';
import { Producer, Subscriber } from '../clients/index.js';
import { num, type CommandSpec, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';
import { stopWhen } from './runtime.js';
import { StatusBoard } from './statusBoard.js';

export const demoSpec: CommandSpec = {
  name: 'demo',
  summary: 'start a daemon with three built-in synthetic feeds and print the dashboard address',
  description: [
    'Starts a daemon in this process and feeds it three invented scenarios through the client',
    'library: a gearbox test stand (random time samples of machine tones, DFT basis), a delay-Doppler',
    'test range (random-phase probe, Gabor operator) and a telemetry channel (Gaussian projections,',
    'Haar basis). Every so often one feed gets a burst of noise so that its alert is raised and',
    'cleared. Prints the dashboard address, then a status line per stream every few seconds.',
    'Runs until Ctrl-C, or for --for seconds. Nothing outside this machine is contacted.',
  ].join('\n'),
  options: [
    { name: 'port', kind: 'int', value: '<n>', min: 0, help: 'Port for the daemon (default 8720; 0 picks a free one).' },
    { name: 'for', kind: 'number', value: '<seconds>', min: 0, help: 'Stop by itself after this long.' },
    { name: 'workers', kind: 'int', value: '<n>', min: 1, help: 'Solver worker threads (default: the number of cores).' },
    { name: 'burst-every', kind: 'number', value: '<seconds>', min: 0, help: 'Noise burst on one feed this often (default 30; 0 = never).' },
    { name: 'status-every', kind: 'number', value: '<seconds>', min: 0, help: 'Status lines this often (default 5; 0 = none).' },
  ],
};

/** Frames of noise per burst: enough for a 3-of-5 alert to rise and, after it, to clear. */
const BURST_FRAMES = 12;

export async function demoCommand(values: OptionValues): Promise<number> {
  const stop = stopWhen(num(values, 'for'));
  let daemon: RunningDaemon;
  try {
    daemon = await startDaemon({
      host: '127.0.0.1',
      port: num(values, 'port') ?? 8720,
      stateDir: null,
      logLevel: 'error',
      ...(num(values, 'workers') ? { workers: num(values, 'workers')! } : {}),
    });
  } catch (err) {
    stop.dispose();
    process.stderr.write(`sparsewire demo: could not start the daemon: ${(err as Error).message}\n(another program may use the port: try --port 0)\n`);
    return EXIT.failure;
  }

  const producer = new Producer({ url: daemon.url });
  const watcher = new Subscriber({ url: daemon.url });
  const board = new StatusBoard();
  watcher.on('result', (r) => board.result(r));
  watcher.on('alert', (a) => {
    board.alert(a);
    process.stdout.write(`${board.alertLine(a)}\n`);
  });
  let code: number = EXIT.ok;
  const timers: NodeJS.Timeout[] = [];
  try {
    await watcher.connect();
    await watcher.subscribe({ streams: '*', want: ['quality', 'alerts'], whenBehind: 'keep_latest' });
    await producer.connect();
    const feeds: Feed[] = FEED_KINDS.map((kind) => createFeed(kind));
    const runs: Promise<number>[] = [];
    for (const feed of feeds) {
      const stream = await producer.declare(feed.declaration);
      process.stdout.write(`stream ${feed.declaration.name}: ${feed.declaration.note ?? feed.kind}, ${feed.framesPerSecond} frames/s\n`);
      runs.push(runFeed(feed, stream, { signal: stop.signal, onFrame: () => board.sent(feed.declaration.name) }));
    }
    // Announced once the streams exist, so whoever follows the address finds them live.
    process.stdout.write(`sparsewire listening on ${daemon.url}\ndashboard: ${daemon.url}/\n`);
    const burstEvery = num(values, 'burst-every') ?? 30;
    if (burstEvery > 0) {
      let next = 0;
      timers.push(
        setInterval(() => {
          const feed = feeds[next++ % feeds.length]!;
          feed.burst(BURST_FRAMES);
          process.stdout.write(`noise burst on ${feed.declaration.name} for ${BURST_FRAMES} frames\n`);
        }, burstEvery * 1000),
      );
    }
    const statusEvery = num(values, 'status-every') ?? 5;
    if (statusEvery > 0) timers.push(setInterval(() => process.stdout.write(board.lines().join('\n') + '\n'), statusEvery * 1000));
    await stop.stopped;
    await Promise.all(runs);
    process.stdout.write(board.lines().join('\n') + '\n');
    await producer.close({ closeStreams: true });
  } catch (err) {
    process.stderr.write(`sparsewire demo: ${(err as Error).message}\n`);
    code = EXIT.failure;
    await producer.close().catch(() => undefined);
  } finally {
    for (const t of timers) clearInterval(t);
    stop.dispose();
    await watcher.close();
    await daemon.close('demo finished');
  }
  process.stdout.write('demo stopped\n');
  return code;
}
