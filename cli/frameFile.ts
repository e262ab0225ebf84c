import { readFileSync } from 'node:fs';
import { fieldPath, streamDeclarationSchema, type StreamDeclaration } from '../protocol/index.js';
import { UsageError } from './args.js';

/**
 * The plain-text frame file `sparsewire send --file` reads (JSON lines, one object a line):
 * line 1 is the stream declaration (as in a `declare` message's `stream`), every further
 * non-empty line one frame: {"y": [re0, im0, re1, im1, …], "time"?: ms, "sigma"?: σ, "seq"?: n}.
 */
export interface FileFrame {
  y: Float64Array;
  time?: number;
  sigma?: number;
  seq?: number;
}

export function readFrameFile(path: string): { declaration: StreamDeclaration; frames: FileFrame[] } {
  let text: string;
  try {
    text = readFileSync(path, 'utf8');
  } catch (err) {
    throw new UsageError(`cannot read ${path}: ${(err as Error).message}`);
  }
  const lines = text.split('\n');
  const parseLine = (i: number): unknown => {
    try {
      return JSON.parse(lines[i]!);
    } catch (err) {
      throw new UsageError(`${path} line ${i + 1}: not JSON (${(err as Error).message})`);
    }
  };
  if (lines.length === 0 || lines[0]!.trim() === '') throw new UsageError(`${path}: line 1 must hold the stream declaration`);
  const parsed = streamDeclarationSchema.safeParse(parseLine(0));
  if (!parsed.success) {
    const issue = parsed.error.issues[0]!;
    throw new UsageError(`${path} line 1: ${fieldPath(issue.path) || 'declaration'}: ${issue.message}`);
  }
  const frames: FileFrame[] = [];
  for (let i = 1; i < lines.length; i++) {
    if (lines[i]!.trim() === '') continue;
    frames.push(frameFrom(parseLine(i), `${path} line ${i + 1}`));
  }
  return { declaration: parsed.data, frames };
}

function frameFrom(raw: unknown, where: string): FileFrame {
  if (typeof raw !== 'object' || raw === null || Array.isArray(raw)) throw new UsageError(`${where}: a frame is a JSON object`);
  const { y, time, sigma, seq, ...rest } = raw as Record<string, unknown>;
  const unknown = Object.keys(rest);
  if (unknown.length > 0) throw new UsageError(`${where}: unknown field "${unknown[0]}" (a frame has y, time, sigma, seq)`);
  if (!Array.isArray(y) || y.length === 0 || y.length % 2 !== 0 || !y.every((v) => typeof v === 'number' && Number.isFinite(v))) {
    throw new UsageError(`${where}: y must be a non-empty list of finite numbers, real and imaginary parts interleaved`);
  }
  const number = (v: unknown, name: string, integer = false): number | undefined => {
    if (v === undefined) return undefined;
    if (typeof v !== 'number' || !Number.isFinite(v) || v < 0 || (integer && !Number.isInteger(v))) {
      throw new UsageError(`${where}: ${name} must be a ${integer ? 'whole ' : ''}number ≥ 0`);
    }
    return v;
  };
  const frame: FileFrame = { y: Float64Array.from(y as number[]) };
  const t = number(time, 'time');
  const s = number(sigma, 'sigma');
  const q = number(seq, 'seq', true);
  if (t !== undefined) frame.time = t;
  if (s !== undefined) frame.sigma = s;
  if (q !== undefined) frame.seq = q;
  return frame;
}

