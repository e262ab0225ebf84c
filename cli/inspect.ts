import { readRecording, RecordingError, type Recording } from '../clients/recording/index.js';
import { flag, UsageError, type CommandSpec, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';
import { formatNumber } from './statusBoard.js';

export const inspectSpec: CommandSpec = {
  name: 'inspect',
  summary: 'summarise a recording: streams, frames, duration, gaps, damaged tail',
  positionals: '<recording>',
  description: [
    'Reads a recording and prints its header (format version, when, from where, note), then per',
    'stream: frames and results, sequence range, gaps in the sequence, duration, alerts and missed',
    'notices; and whether the file ends cleanly. A torn or corrupt tail is described with the byte',
    'offset and record number where the intact part ends; the command then exits 4.',
  ].join('\n'),
  options: [{ name: 'json', kind: 'flag', help: 'Print the summary as one JSON object.' }],
};

export interface StreamSummary {
  name: string;
  declared: boolean;
  frames: number;
  results: number;
  firstSeq: number | null;
  lastSeq: number | null;
  /** Missing seq ranges between the first and last frame, [from, to] inclusive. */
  gaps: Array<[number, number]>;
  /** Last frame time minus first frame time, ms. */
  durationMs: number;
  alertsRaised: number;
  alertsCleared: number;
  missedResults: number;
}

export interface RecordingSummary {
  file: string;
  bytes: number;
  createdAt: string;
  source: string;
  note?: string;
  records: number;
  streams: StreamSummary[];
  damage: Recording['damage'];
}

export function summarise(file: string, recording: Recording): RecordingSummary {
  const streams = new Map<string, StreamSummary & { seqs: number[]; times: number[] }>();
  const entry = (name: string) => {
    let s = streams.get(name);
    if (!s) {
      s = { name, declared: false, frames: 0, results: 0, firstSeq: null, lastSeq: null, gaps: [], durationMs: 0, alertsRaised: 0, alertsCleared: 0, missedResults: 0, seqs: [], times: [] };
      streams.set(name, s);
    }
    return s;
  };
  for (const d of recording.header.streams) entry(d.name).declared = true;
  for (const { message: m } of recording.entries) {
    const s = entry(m.stream);
    if (m.type === 'frame') {
      s.frames++;
      s.seqs.push(m.seq);
      s.times.push(m.time);
    } else if (m.type === 'result') s.results++;
    else if (m.type === 'alert') m.state === 'raised' ? s.alertsRaised++ : s.alertsCleared++;
    else if (m.type === 'missed') s.missedResults += m.count;
    else if (m.event === 'declared') s.declared = true;
  }
  const summaries = [...streams.values()].map(({ seqs, times, ...s }) => {
    const sorted = [...seqs].sort((a, b) => a - b);
    for (let i = 1; i < sorted.length; i++) if (sorted[i]! > sorted[i - 1]! + 1) s.gaps.push([sorted[i - 1]! + 1, sorted[i]! - 1]);
    s.firstSeq = sorted[0] ?? null;
    s.lastSeq = sorted.at(-1) ?? null;
    s.durationMs = times.length > 1 ? Math.max(...times) - Math.min(...times) : 0;
    return s;
  });
  return {
    file,
    bytes: recording.size,
    createdAt: new Date(recording.header.created_at).toISOString(),
    source: recording.header.source,
    ...(recording.header.note ? { note: recording.header.note } : {}),
    records: recording.entries.length,
    streams: summaries,
    damage: recording.damage,
  };
}

export function summaryText(s: RecordingSummary): string {
  const rows = s.streams.map((t) => [
    t.name,
    String(t.frames),
    String(t.results),
    t.firstSeq === null ? '-' : `${t.firstSeq}-${t.lastSeq}`,
    t.gaps.length === 0 ? '0' : `${t.gaps.length}: ${t.gaps.slice(0, 3).map(([a, b]) => (a === b ? `${a}` : `${a}-${b}`)).join(', ')}${t.gaps.length > 3 ? ', ...' : ''}`,
    `${formatNumber(t.durationMs / 1000)} s`,
    `${t.alertsRaised}/${t.alertsCleared}`,
    String(t.missedResults),
  ]);
  const header = ['stream', 'frames', 'results', 'seqs', 'gaps', 'duration', 'alerts raised/cleared', 'missed'];
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i]!.length)));
  const line = (cells: string[]) => cells.map((c, i) => c.padEnd(widths[i]!)).join('  ').trimEnd();
  return [
    `recording  ${s.file} (${s.bytes} bytes, format version 1)`,
    `created    ${s.createdAt} from ${s.source}`,
    ...(s.note ? [`note       ${s.note}`] : []),
    `records    ${s.records} intact`,
    '',
    line(header),
    ...rows.map(line),
    '',
    s.damage ? `end        DAMAGED (${s.damage.kind}, ${s.damage.bytes} bytes from byte ${s.damage.offset}): ${s.damage.message}` : 'end        clean',
    '',
  ].join('\n');
}

export async function inspectCommand(values: OptionValues, positionals: string[]): Promise<number> {
  if (positionals.length !== 1) throw new UsageError('give exactly one recording file');
  const file = positionals[0]!;
  let recording: Recording;
  try {
    recording = readRecording(file);
  } catch (err) {
    if (err instanceof RecordingError || (err as NodeJS.ErrnoException).code === 'ENOENT') {
      process.stderr.write(`sparsewire inspect: ${file}: ${(err as Error).message}\n`);
      return EXIT.damaged;
    }
    throw err;
  }
  const summary = summarise(file, recording);
  process.stdout.write(flag(values, 'json') ? `${JSON.stringify(summary)}\n` : summaryText(summary));
  return recording.damage ? EXIT.damaged : EXIT.ok;
}
