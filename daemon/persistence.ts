import { mkdir, open, readFile, rename, writeFile } from 'node:fs/promises';
import path from 'node:path';
import type { StreamDeclaration } from '../pipeline/types.js';

/**
 * Stream declarations survive restarts in one JSON file, `streams.json` under the state
 * directory, replaced atomically: write a temporary file, fsync it, rename it over the old one,
 * fsync the directory. A crash leaves either the old or the new file, never a torn one.
 * Writes are serialised and coalesced: while one is in progress, later requests collapse into
 * one more write of the latest state.
 */

export const STATE_FILE = 'streams.json';
const FORMAT_VERSION = 1;

export interface PersistedStream {
  declaration: StreamDeclaration;
  /** The sequence number the stream expects next (null before its first frame). */
  next_seq: number | null;
}

interface StateFile {
  format: number;
  streams: PersistedStream[];
}

export class DeclarationStore {
  private readonly file: string;
  private writing: Promise<void> | undefined;
  private again = false;

  constructor(
    readonly dir: string,
    private readonly snapshot: () => PersistedStream[],
  ) {
    this.file = path.join(dir, STATE_FILE);
  }

  /** Reads the saved streams; an absent file means none. A corrupt file is an error. */
  async load(): Promise<PersistedStream[]> {
    let text: string;
    try {
      text = await readFile(this.file, 'utf8');
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code === 'ENOENT') return [];
      throw err;
    }
    const parsed = JSON.parse(text) as StateFile;
    if (parsed.format !== FORMAT_VERSION || !Array.isArray(parsed.streams)) {
      throw new Error(`${this.file}: unsupported state file (format ${String(parsed.format)})`);
    }
    return parsed.streams;
  }

  /** Schedules a write of the current snapshot; resolves once a write that includes it is on disk. */
  save(): Promise<void> {
    if (this.writing) {
      this.again = true;
      return this.writing;
    }
    this.writing = (async () => {
      try {
        do {
          this.again = false;
          await this.writeAtomically({ format: FORMAT_VERSION, streams: this.snapshot() });
        } while (this.again);
      } finally {
        this.writing = undefined;
      }
    })();
    return this.writing;
  }

  private async writeAtomically(state: StateFile): Promise<void> {
    await mkdir(this.dir, { recursive: true });
    const tmp = `${this.file}.${process.pid}.tmp`;
    await writeFile(tmp, JSON.stringify(state, null, 2) + '\n', 'utf8');
    const fh = await open(tmp, 'r+');
    try {
      await fh.sync();
    } finally {
      await fh.close();
    }
    await rename(tmp, this.file);
    const dh = await open(this.dir, 'r');
    try {
      await dh.sync();
    } finally {
      await dh.close();
    }
  }
}
