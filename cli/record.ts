import { SessionRecorder } from '../clients/recording/index.js';
import { Subscriber } from '../clients/index.js';
import { DAEMON_OPTIONS, num, str, UsageError, type CommandSpec, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';
import { connectionOptions, stopWhen } from './runtime.js';

export const recordSpec: CommandSpec = {
  name: 'record',
  summary: 'record a session (frames, results, alerts) from a daemon into a recording file',
  description: [
    'Subscribes to the matching streams and writes every frame (as the producer sent it), every',
    'result (coefficients and evidence), alert, missed-result notice and stream event into a',
    'recording file: a header with the format version and the stream declarations, then',
    'length-prefixed records each with a CRC-32 (docs/recording.md). The file is synced to disk',
    'every --fsync-every records or --fsync-ms milliseconds, whichever comes first, and on exit.',
    'Runs until Ctrl-C, --for or --count. Replay it with sparsewire replay.',
  ].join('\n'),
  options: [
    ...DAEMON_OPTIONS,
    { name: 'out', kind: 'string', value: '<path>', help: 'The recording file to write (required; replaced if it exists).' },
    { name: 'streams', kind: 'string', value: '<pattern>', help: "Streams to record (default '*')." },
    { name: 'for', kind: 'number', value: '<seconds>', min: 0, help: 'Stop after this long.' },
    { name: 'count', kind: 'int', value: '<n>', min: 1, help: 'Stop after this many results.' },
    { name: 'note', kind: 'string', value: '<text>', help: 'A note kept in the header.' },
    { name: 'fsync-every', kind: 'int', value: '<records>', min: 0, help: 'Sync to disk after this many records (default 256; 0 = not by count).' },
    { name: 'fsync-ms', kind: 'int', value: '<ms>', min: 0, help: 'Sync to disk when this long has passed since the last sync (default 1000; 0 = not by time).' },
  ],
};

export async function recordCommand(values: OptionValues): Promise<number> {
  const out = str(values, 'out');
  if (!out) throw new UsageError('--out <path> is required');
  const connection = connectionOptions(values);
  const subscriber = new Subscriber(connection);
  const recorder = new SessionRecorder(subscriber);
  const limit = num(values, 'count');
  const stop = stopWhen(num(values, 'for'));
  subscriber.on('result', () => {
    if (limit !== undefined && recorder.counts.results >= limit) {
      recorder.stop();
      stop.abort();
    }
  });
  try {
    await subscriber.connect();
    const answer = await subscriber.subscribe({
      streams: str(values, 'streams') ?? '*',
      want: ['coefficients', 'measurements', 'quality', 'alerts'],
      whenBehind: 'drop_with_notice',
    });
    const note = str(values, 'note');
    recorder.start(
      out,
      { source: connection.url, ...(note ? { note } : {}), streams: answer.streams },
      {
        ...(num(values, 'fsync-every') !== undefined ? { everyRecords: num(values, 'fsync-every')! } : {}),
        ...(num(values, 'fsync-ms') !== undefined ? { everyMs: num(values, 'fsync-ms')! } : {}),
      },
    );
    process.stderr.write(`recording ${answer.streams.length} streams from ${connection.url} into ${out}\n`);
    await stop.stopped;
  } finally {
    stop.dispose();
    await subscriber.close();
    recorder.close();
  }
  const c = recorder.counts;
  process.stdout.write(
    `recorded ${c.frames} frames, ${c.results} results, ${c.alerts} alerts, ${c.missed} missed notices, ${c.streamEvents} stream events into ${out} (${recorder.bytes} bytes)\n`,
  );
  return EXIT.ok;
}
