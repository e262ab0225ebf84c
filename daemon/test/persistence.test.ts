import { mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import os from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { DeclarationStore, STATE_FILE, type PersistedStream } from '../persistence.js';

// The declarations file: atomic replacement (temporary file then rename; no temporary file left
// behind), coalesced writes that always end with the latest state, and clear load errors.
describe('DeclarationStore', () => {
  let dir: string;
  afterEach(() => rm(dir, { recursive: true, force: true }));

  const stream = (name: string, next: number | null): PersistedStream => ({
    declaration: { name, operator: { kind: 'x' }, solver: { method: 'y' }, alerts: [], queue: { capacity: 1, policy: 'refuse_new' } },
    next_seq: next,
  });

  it('round-trips, writes atomically and coalesces bursts into the latest state', async () => {
    dir = await mkdtemp(path.join(os.tmpdir(), 'sparsewire-store-'));
    let state = [stream('a', null)];
    const store = new DeclarationStore(path.join(dir, 'nested'), () => state);
    expect(await store.load()).toEqual([]); // absent file: nothing saved yet
    const writes = [];
    for (let i = 0; i < 20; i++) {
      state = [stream('a', i), stream('b', 2 * i)];
      writes.push(store.save());
    }
    await Promise.all(writes);
    expect(await store.load()).toEqual([stream('a', 19), stream('b', 38)]);
    expect(await readdir(path.join(dir, 'nested'))).toEqual([STATE_FILE]);
  });

  it('refuses a state file of an unknown format', async () => {
    dir = await mkdtemp(path.join(os.tmpdir(), 'sparsewire-store-'));
    await writeFile(path.join(dir, STATE_FILE), JSON.stringify({ format: 99, streams: [] }));
    await expect(new DeclarationStore(dir, () => []).load()).rejects.toThrow(/unsupported state file/);
    expect(JSON.parse(await readFile(path.join(dir, STATE_FILE), 'utf8')).format).toBe(99); // untouched
  });
});
