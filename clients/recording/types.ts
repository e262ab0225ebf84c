import type { AlertMessage, FrameMessage, MissedMessage, ResultMessage, StreamDeclaration, StreamEventMessage } from '../../protocol/index.js';

export interface RecordingHeader {
  /** When recording started, ms since the epoch. */
  created_at: number;
  /** Where the records came from (a daemon address). */
  source: string;
  note?: string;
  /** Declarations of the streams known when recording started (later ones come as stream_event records). */
  streams: StreamDeclaration[];
}

export type RecordedMessage = FrameMessage | ResultMessage | StreamEventMessage | AlertMessage | MissedMessage;

export interface RecordingEntry {
  /** When the recorder saw the message, ms since the epoch. */
  at: number;
  message: RecordedMessage;
}
