import type { FrameMessage, ResultMessage, StreamDeclaration } from '../../protocol/index.js';
import type { Recording } from './reader.js';

/** A recording sorted out for replay and inspection. */
export interface RecordedSession {
  /** Every stream declaration seen: the header's, then later stream events (last one wins). */
  declarations: Map<string, StreamDeclaration>;
  /** Frames in file order, with when they were recorded. */
  frames: Array<{ at: number; frame: FrameMessage }>;
  /** Results by resultKey(stream, seq). */
  results: Map<string, ResultMessage>;
}

export function resultKey(stream: string, seq: number): string {
  return `${stream}#${seq}`;
}

export function sessionOf(recording: Recording): RecordedSession {
  const declarations = new Map<string, StreamDeclaration>(recording.header.streams.map((d) => [d.name, d]));
  const frames: RecordedSession['frames'] = [];
  const results = new Map<string, ResultMessage>();
  for (const { at, message } of recording.entries) {
    if (message.type === 'frame') frames.push({ at, frame: message });
    else if (message.type === 'result') results.set(resultKey(message.stream, message.seq), message);
    else if (message.type === 'stream_event' && message.event === 'declared' && message.declaration) {
      declarations.set(message.stream, message.declaration as StreamDeclaration);
    }
  }
  return { declarations, frames, results };
}
