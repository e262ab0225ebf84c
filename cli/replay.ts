import { readRecording, RecordingError, resultKey, sessionOf, type RecordedSession } from '../clients/recording/index.js';
import { Producer, Subscriber, pause, type ProducerStream } from '../clients/index.js';
import { binToFloat64, streamNameProblem, type ResultMessage, type StreamDeclaration } from '../protocol/index.js';
import { DAEMON_OPTIONS, flag, list, num, str, UsageError, type CommandSpec, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';
import { checkSummary, compareSession, passed } from './replayCheck.js';
import { connectionOptions, stopWhen } from './runtime.js';

export const replaySpec: CommandSpec = {
  name: 'replay',
  summary: 'send a recording’s frames to a daemon again, optionally checking the results',
  positionals: '<recording>',
  description: [
    'Declares the recorded streams afresh (under --prefix, default "replay.", so live streams are',
    'not touched) and sends the recorded frames in their recorded order: at the original pace,',
    '--speed times faster, or --fast (as fast as the daemon’s credits allow). --loop repeats.',
    'With --check, subscribes to the replayed streams and compares each result with the recorded',
    'one: coefficients within --tolerance (relative to the largest recorded coefficient), the',
    'same iteration count and the same quality flags. A difference or a missing result prints a',
    'diff summary and exits 3. A damaged recording replays its intact records (with a warning).',
    '--set changes a declaration field for the replay, e.g. --set solver.maxIterations=20.',
  ].join('\n'),
  options: [
    ...DAEMON_OPTIONS,
    { name: 'speed', kind: 'number', value: '<factor>', help: 'Pace relative to the recording (default 1 = original pace).' },
    { name: 'fast', kind: 'flag', help: 'Ignore the recorded pace: send as fast as credits allow.' },
    { name: 'loop', kind: 'int', value: '<n>', min: 0, help: 'Passes over the recording (default 1; 0 = until stopped).' },
    { name: 'check', kind: 'flag', help: 'Compare the results with the recorded ones; exit 3 on any difference.' },
    { name: 'tolerance', kind: 'number', value: '<t>', min: 0, help: 'Allowed relative coefficient difference for --check (default 1e-9; 0 = bit for bit).' },
    { name: 'prefix', kind: 'string', value: '<text>', help: 'Put this before every replayed stream name (default "replay."; "" keeps the names).' },
    { name: 'set', kind: 'string', value: '<field=value>', multiple: true, help: 'Override a declaration field (dotted path, JSON value) for the replay; repeatable.' },
    { name: 'for', kind: 'number', value: '<seconds>', min: 0, help: 'Stop after this long.' },
  ],
};

/** How long to wait for the last results once every frame is acknowledged. */
const RESULT_WAIT_MS = 15_000;

export async function replayCommand(values: OptionValues, positionals: string[]): Promise<number> {
  if (positionals.length !== 1) throw new UsageError('give exactly one recording file');
  const speed = num(values, 'speed') ?? 1;
  if (!(speed > 0)) throw new UsageError('--speed must be above 0');
  const prefix = str(values, 'prefix') ?? 'replay.';
  const overrides = list(values, 'set').map(parseOverride);
  const connection = connectionOptions(values);

  let session: RecordedSession;
  try {
    const recording = readRecording(positionals[0]!);
    if (recording.damage) {
      process.stderr.write(`warning: ${positionals[0]} is damaged (${recording.damage.kind}): ${recording.damage.message}\nreplaying the intact part\n`);
    }
    session = sessionOf(recording);
  } catch (err) {
    if (err instanceof RecordingError || (err as NodeJS.ErrnoException).code === 'ENOENT') {
      process.stderr.write(`sparsewire replay: ${positionals[0]}: ${(err as Error).message}\n`);
      return EXIT.damaged;
    }
    throw err;
  }
  const streamNames = [...new Set(session.frames.map((f) => f.frame.stream))];
  const rename = (name: string) => prefix + name;
  const declarations = streamNames.map((name) => {
    const recorded = session.declarations.get(name);
    if (!recorded) throw new UsageError(`the recording has frames of ${name} but no declaration for it`);
    const problem = streamNameProblem(rename(name));
    if (problem) throw new UsageError(`--prefix "${prefix}" makes "${rename(name)}": ${problem}`);
    return applyOverrides({ ...recorded, name: rename(name) }, overrides);
  });
  if (session.frames.length === 0) {
    process.stdout.write('the recording holds no frames: nothing to replay\n');
    return EXIT.ok;
  }

  const check = flag(values, 'check');
  const tolerance = num(values, 'tolerance') ?? 1e-9;
  const passes = num(values, 'loop') ?? 1;
  const stop = stopWhen(num(values, 'for'));
  const producer = new Producer(connection);
  const subscriber = check ? new Subscriber(connection) : null;
  const replayed = new Map<string, ResultMessage>();
  subscriber?.on('result', (r) => replayed.set(resultKey(r.stream, r.seq), r.raw));
  const refusals: string[] = [];
  producer.on('refused', (m, willResend) => willResend || refusals.push(`${m.stream} #${m.seq}: ${m.reason}`));
  let failedChecks = 0;
  try {
    await producer.connect();
    if (subscriber) {
      await subscriber.connect();
      await subscriber.subscribe({ streams: declarations.map((d) => d.name), want: ['coefficients', 'quality'], whenBehind: 'drop_with_notice' });
    }
    const pace = flag(values, 'fast') ? 'as fast as credits allow' : speed === 1 ? 'at the original pace' : `at ${speed}x the original pace`;
    for (let pass = 1; (passes === 0 || pass <= passes) && !stop.signal.aborted; pass++) {
      process.stdout.write(`pass ${pass}: replaying ${session.frames.length} frames of ${declarations.length} streams ${pace}\n`);
      replayed.clear();
      const streams = await declareFresh(producer, declarations);
      await sendFrames(session, streams, rename, flag(values, 'fast') ? null : speed, stop.signal);
      for (const s of streams.values()) await s.drained();
      if (subscriber) {
        const expected = session.frames.filter((f) => session.results.has(resultKey(f.frame.stream, f.frame.seq)));
        const deadline = Date.now() + RESULT_WAIT_MS;
        while (!stop.signal.aborted && Date.now() < deadline && !expected.every((f) => replayed.has(resultKey(rename(f.frame.stream), f.frame.seq)))) {
          await pause(20, stop.signal);
        }
        const report = compareSession(session.results, replayed, session.frames.map((f) => f.frame), rename, tolerance);
        process.stdout.write(`${checkSummary(report)}\n`);
        if (!passed(report)) failedChecks++;
      }
      for (const s of streams.values()) await s.close();
    }
  } finally {
    stop.dispose();
    await producer.close();
    await subscriber?.close();
  }
  if (refusals.length > 0) process.stderr.write(`${refusals.length} frames were refused: ${refusals.slice(0, 5).join('; ')}\n`);
  if (failedChecks > 0) return EXIT.regression;
  return refusals.length > 0 ? EXIT.failure : EXIT.ok;
}

async function declareFresh(producer: Producer, declarations: StreamDeclaration[]): Promise<Map<string, ProducerStream>> {
  const streams = new Map<string, ProducerStream>();
  for (const d of declarations) {
    const stream = await producer.declare(d);
    if (stream.nextSeq > 0) {
      throw new Error(`stream ${d.name} already has frames at the daemon; replay needs fresh streams (choose another --prefix)`);
    }
    streams.set(d.name, stream);
  }
  return streams;
}

/** Sends every frame in recorded order; `speed` null = no pacing. */
async function sendFrames(
  session: RecordedSession,
  streams: Map<string, ProducerStream>,
  rename: (name: string) => string,
  speed: number | null,
  signal: AbortSignal,
): Promise<void> {
  const start = performance.now();
  const firstTime = session.frames[0]!.frame.time;
  for (const { frame } of session.frames) {
    if (signal.aborted) return;
    if (speed !== null) {
      const wait = (frame.time - firstTime) / speed - (performance.now() - start);
      if (wait > 0) await pause(wait, signal);
    }
    await streams.get(rename(frame.stream))!.send(binToFloat64(frame.y, 'y'), {
      seq: frame.seq,
      time: frame.time,
      ...(frame.sigma !== undefined ? { sigma: frame.sigma } : {}),
    });
  }
}

interface Override {
  path: string[];
  value: unknown;
}

function parseOverride(text: string): Override {
  const eq = text.indexOf('=');
  if (eq <= 0) throw new UsageError(`--set wants field=value, got "${text}"`);
  const path = text.slice(0, eq).split('.');
  if (path.some((p) => p === '') || path[0] === 'name') throw new UsageError(`--set cannot change "${text.slice(0, eq)}"`);
  const raw = text.slice(eq + 1);
  let value: unknown;
  try {
    value = JSON.parse(raw);
  } catch {
    value = raw;
  }
  return { path, value };
}

function applyOverrides(declaration: StreamDeclaration, overrides: Override[]): StreamDeclaration {
  const copy = structuredClone(declaration) as unknown as Record<string, unknown>;
  for (const { path, value } of overrides) {
    let node = copy;
    for (const key of path.slice(0, -1)) {
      const next = node[key];
      if (typeof next !== 'object' || next === null) node[key] = {};
      node = node[key] as Record<string, unknown>;
    }
    node[path.at(-1)!] = value;
  }
  return copy as unknown as StreamDeclaration;
}
