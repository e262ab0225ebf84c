/** Recording files: append-only, CRC-checked records of frames, results and events. */
export { RecordingWriter, DEFAULT_FSYNC, type FsyncPolicy } from './writer.js';
export { readRecording, parseRecording, RecordingError, type Recording, type DamagedTail } from './reader.js';
export { crc32 } from './crc32.js';
export type { RecordingHeader, RecordingEntry, RecordedMessage } from './types.js';
export { SessionRecorder, type RecorderCounts } from './recorder.js';
export { sessionOf, resultKey, type RecordedSession } from './session.js';
