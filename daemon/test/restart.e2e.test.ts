import { mkdtemp, readFile, rm } from 'node:fs/promises';
import os from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { ErrorMessage, SubscribedMessage } from '../../protocol/index.js';
import { TestClient, declare, eventually, frameMessage, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// Declarations persist across restarts: a restarted daemon lists the stream, subscribers see it,
// and the producer re-declaring it resumes at the next sequence number.

describe('restart', () => {
  let dir: string;
  afterAll(() => rm(dir, { recursive: true, force: true }));

  it('restores declared streams and their sequence numbers', async () => {
    dir = await mkdtemp(path.join(os.tmpdir(), 'sparsewire-state-'));
    const s = dftStream();
    const stream = { name: 'durable', operator: s.operator, solver: { method: 'lasso' }, queue: { capacity: 8, policy: 'drop_oldest' as const }, note: 'kept across restarts' };

    const first = await startTestDaemon({ stateDir: dir, workers: 1 });
    const p1 = await TestClient.connect(wsUrl(first, '/v1/produce'));
    await declare(p1, stream);
    for (let t = 0; t < 5; t++) p1.send(frameMessage('durable', t, s.measurements(t)));
    await p1.next((m) => m.type === 'ack' && m.through_seq === 4);
    await first.close('restart');
    expect(p1.closed).toMatchObject({ code: 1001, reason: 'restart' });

    const saved = JSON.parse(await readFile(path.join(dir, 'streams.json'), 'utf8')) as { streams: { declaration: { name: string; note: string }; next_seq: number }[] };
    expect(saved.streams).toEqual([expect.objectContaining({ declaration: expect.objectContaining({ name: 'durable', note: 'kept across restarts' }), next_seq: 5 })]);

    const second = await startTestDaemon({ stateDir: dir, workers: 1 });
    try {
      expect(second.restoredStreams).toBe(1);
      await eventually(() => second.streams().some((x) => (x as { state: string }).state === 'open'), 'the restored stream is open');
      const w = await TestClient.connect(wsUrl(second, '/v1/watch'));
      w.send({ v: 1, type: 'subscribe', ref: 's', streams: '*', want: ['coefficients'], when_behind: 'drop_with_notice' });
      const subscribed = await w.next<SubscribedMessage>((m) => m.type === 'subscribed');
      expect(subscribed.streams.map((d) => d.name)).toEqual(['durable']);

      const p2 = await TestClient.connect(wsUrl(second, '/v1/produce'));
      const again = await declare(p2, stream);
      expect(again.next_seq).toBe(5);
      expect(again.credits).toBe(8);
      p2.send(frameMessage('durable', 5, s.measurements(5)));
      const result = await w.next((m) => m.type === 'result' && m.seq === 5);
      expect(result.type === 'result' && result.flags).toContain('cold_start'); // warm state does not survive a restart
      // A frame from before the restart is recognised as already received.
      p2.send(frameMessage('durable', 3, s.measurements(3)));
      expect(await p2.next((m) => m.type === 'refused' && m.seq === 3)).toMatchObject({ reason: 'duplicate' });
      // A different declaration under the same name is a conflict.
      p2.send({ v: 1, type: 'declare', ref: 'other', stream: { ...stream, solver: { method: 'omp', sparsity: 4 } } });
      expect(await p2.next<ErrorMessage>((m) => m.type === 'error' && m.ref === 'other')).toMatchObject({ code: 'declaration_conflict', field: 'stream' });
      // Closing forgets it, on disk too.
      p2.send({ v: 1, type: 'close', ref: 'c', stream: 'durable' });
      await p2.next((m) => m.type === 'closed' && m.ref === 'c');
      expect(await w.next((m) => m.type === 'stream_event' && m.event === 'closed')).toMatchObject({ stream: 'durable' });
      const after = JSON.parse(await readFile(path.join(dir, 'streams.json'), 'utf8')) as { streams: unknown[] };
      expect(after.streams).toEqual([]);
    } finally {
      await second.close();
    }
  });
});
