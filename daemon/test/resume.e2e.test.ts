import { describe, expect, it } from 'vitest';
import type { ResultMessage } from '../../protocol/index.js';
import { TestClient, declare, frameMessage, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// A subscriber that reconnects with resume_after gets the retained results again, exactly as
// they were first sent, and a `not_retained` notice for what the daemon no longer holds.

describe('resuming subscribers', () => {
  it('replays retained results byte for byte and names the span no longer held', async () => {
    const daemon = await startTestDaemon({ workers: 1, retainedResults: 4 });
    try {
      const s = dftStream();
      const want = ['coefficients', 'top_k', 'signal', 'measurements'] as const;
      const live = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
      live.send({ v: 1, type: 'subscribe', ref: 'l', streams: 'kept', want: [...want], top_k: 2, when_behind: 'drop_with_notice' });
      await live.next((m) => m.type === 'subscribed');
      const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
      await declare(p, { name: 'kept', operator: s.operator, solver: { method: 'omp', sparsity: 4 }, noise_sigma: 0.01 });
      for (let t = 0; t < 10; t++) p.send(frameMessage('kept', t, s.measurements(t), t % 2 === 0 ? 0.02 : undefined));
      await live.next((m) => m.type === 'result' && m.seq === 9);

      const late = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
      late.send({ v: 1, type: 'subscribe', ref: 'r', streams: 'kept', want: [...want], top_k: 2, when_behind: 'drop_with_notice', resume_after: { kept: 2 } });
      await late.next((m) => m.type === 'result' && m.seq === 9);
      // Four results retained (6..9); 3..5 are announced as no longer held.
      expect(late.ofType('missed')).toEqual([{ v: 1, type: 'missed', stream: 'kept', from_seq: 3, to_seq: 5, count: 3, reason: 'not_retained' }]);
      const replayed = late.ofType('result');
      expect(replayed.map((r) => r.seq)).toEqual([6, 7, 8, 9]);
      const original = new Map(live.ofType('result').map((r) => [r.seq, r]));
      for (const r of replayed) expect(comparable(r)).toEqual(comparable(original.get(r.seq)!));
      live.close();
      late.close();
      p.close();
    } finally {
      await daemon.close();
    }
  });
});

/** A result with its binary fields as hex, so two decoded copies compare by content. */
function comparable(r: ResultMessage): unknown {
  return JSON.parse(JSON.stringify(r, (_k, v: unknown) => (v instanceof Uint8Array ? Buffer.from(v).toString('hex') : v)));
}
