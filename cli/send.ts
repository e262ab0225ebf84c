import { createFeed, FEED_KINDS, runFeed, type FeedKind } from '../clients/feeds/index.js';
import { Producer, pause, type ProducerStream } from '../clients/index.js';
import type { RefusedMessage, StreamDeclaration } from '../protocol/index.js';
import { DAEMON_OPTIONS, flag, num, str, UsageError, type CommandSpec, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';
import { readFrameFile, type FileFrame } from './frameFile.js';
import { connectionOptions, stopWhen } from './runtime.js';

export const sendSpec: CommandSpec = {
  name: 'send',
  summary: 'act as a producer: send frames of a synthetic feed or of a frame file to a daemon',
  description: [
    'Declares one stream and sends frames to it, waiting for credit from the daemon (frames are',
    'never dropped on this side). With --feed, frames come from a built-in synthetic scenario;',
    'with --file, from a JSON-lines file: the first line is the stream declaration, each further',
    'line a frame {"y": [re0, im0, re1, im1, ...], "time"?, "sigma"?, "seq"?} (docs/cli.md).',
    'When everything is sent, waits until the daemon has acknowledged every frame and prints a',
    'summary. Exits 1 if any frame was refused.',
  ].join('\n'),
  options: [
    ...DAEMON_OPTIONS,
    { name: 'feed', kind: 'string', value: '<scenario>', choices: FEED_KINDS, help: 'Send a synthetic feed.' },
    { name: 'file', kind: 'string', value: '<path>', help: 'Send the frames of a JSON-lines frame file.' },
    { name: 'name', kind: 'string', value: '<stream>', help: 'Stream name (default: the feed’s or the file’s).' },
    { name: 'frames', kind: 'int', value: '<n>', min: 0, help: 'Stop after this many frames (a feed runs until stopped otherwise).' },
    { name: 'rate', kind: 'number', value: '<per-second>', min: 0, help: 'Frames per second (default: the feed’s rate; files as fast as credits allow; 0 = as fast as possible).' },
    { name: 'for', kind: 'number', value: '<seconds>', min: 0, help: 'Stop sending after this long.' },
    { name: 'seed', kind: 'int', value: '<n>', min: 0, help: 'Seed of the feed’s motion and noise.' },
    { name: 'burst-at', kind: 'int', value: '<frame>', min: 0, help: 'Feed only: start a noise burst at this frame.' },
    { name: 'burst-frames', kind: 'int', value: '<n>', min: 1, help: 'Length of that burst (default 12).' },
    { name: 'close', kind: 'flag', help: 'End the stream at the daemon when done (otherwise it stays declared).' },
  ],
};

export async function sendCommand(values: OptionValues): Promise<number> {
  const feedKind = str(values, 'feed') as FeedKind | undefined;
  const file = str(values, 'file');
  if ((feedKind === undefined) === (file === undefined)) throw new UsageError('give exactly one of --feed or --file');
  if (file !== undefined && (values['burst-at'] !== undefined || values.seed !== undefined)) {
    throw new UsageError('--burst-at and --seed apply to --feed only');
  }
  const connection = connectionOptions(values);
  const name = str(values, 'name');
  const feed = feedKind ? createFeed(feedKind, { ...(name ? { name } : {}), ...(num(values, 'seed') !== undefined ? { seed: num(values, 'seed')! } : {}) }) : undefined;
  const fromFile = file ? readFrameFile(file) : undefined;
  const declaration: StreamDeclaration = feed ? feed.declaration : { ...fromFile!.declaration, ...(name ? { name } : {}) };

  const producer = new Producer(connection);
  const refused: RefusedMessage[] = [];
  let solved = 0;
  let dropped = 0;
  producer.on('refused', (msg, willResend) => {
    if (!willResend) refused.push(msg);
  });
  producer.on('ack', (ack) => {
    solved += ack.solved;
    dropped += ack.dropped;
  });
  producer.on('daemonError', (e) => process.stderr.write(`sparsewire send: the daemon reports ${e.code}: ${e.detail}\n`));
  await producer.connect();
  const stop = stopWhen(num(values, 'for'));
  let sent = 0;
  try {
    const stream = await producer.declare(declaration);
    if (feed) {
      const burstAt = num(values, 'burst-at');
      sent = await runFeed(feed, stream, {
        ...(num(values, 'rate') !== undefined ? { rate: num(values, 'rate')! } : {}),
        ...(num(values, 'frames') !== undefined ? { frames: num(values, 'frames')! } : {}),
        signal: stop.signal,
        onFrame: () => {
          if (burstAt !== undefined && feed.frameCount === burstAt) feed.burst(num(values, 'burst-frames') ?? 12);
        },
      });
    } else {
      sent = await sendFileFrames(stream, fromFile!.frames, num(values, 'rate') ?? 0, num(values, 'frames'), stop.signal);
    }
    await stream.drained();
    if (flag(values, 'close')) await stream.close();
  } finally {
    stop.dispose();
    await producer.close();
  }
  process.stdout.write(
    `sent ${sent} frames to ${declaration.name}: ${solved} solved, ${dropped} dropped by the queue policy, ${refused.length} refused\n`,
  );
  for (const r of refused.slice(0, 5)) process.stderr.write(`  refused #${r.seq}: ${r.reason} (${r.detail})\n`);
  return refused.length > 0 ? EXIT.failure : EXIT.ok;
}

async function sendFileFrames(stream: ProducerStream, frames: FileFrame[], rate: number, limit: number | undefined, signal: AbortSignal): Promise<number> {
  const count = Math.min(frames.length, limit ?? frames.length);
  let sent = 0;
  for (let i = 0; i < count && !signal.aborted; i++) {
    const f = frames[i]!;
    await stream.send(f.y, {
      ...(f.seq !== undefined ? { seq: f.seq } : {}),
      ...(f.time !== undefined ? { time: f.time } : {}),
      ...(f.sigma !== undefined ? { sigma: f.sigma } : {}),
    });
    sent++;
    if (rate > 0) await pause(1000 / rate, signal);
  }
  return sent;
}
