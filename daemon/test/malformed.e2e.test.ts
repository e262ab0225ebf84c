import { pack } from 'msgpackr';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ErrorMessage, RefusedMessage } from '../../protocol/index.js';
import type { RunningDaemon } from '../index.js';
import { TestClient, declare, frameMessage, metricValue, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// Malformed input gets an answer naming the problem, while the connection and the other streams
// carry on. Expected codes and reasons are the protocol's (docs/protocol.md, "Errors").

describe('malformed input', () => {
  let daemon: RunningDaemon;
  const s = dftStream();
  beforeAll(async () => {
    daemon = await startTestDaemon({ workers: 2, limits: { maxMessageBytes: 64 * 1024 } as never });
  });
  afterAll(() => daemon.close());

  it('is answered with errors and refusals that name the problem; everything else continues', async () => {
    const other = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    await declare(other, { name: 'bystander', operator: s.operator, solver: { method: 'lasso' } });
    const watcher = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
    watcher.send({ v: 1, type: 'subscribe', ref: 's', streams: '*', want: ['quality'], when_behind: 'drop_with_notice' });
    await watcher.next((m) => m.type === 'subscribed');

    const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    await declare(p, { name: 'target', operator: s.operator, solver: { method: 'lasso' } });
    const y = s.measurements(0);
    let bystanderSeq = 0;
    const bystanderFrame = () => other.send(frameMessage('bystander', bystanderSeq++, y));

    const errorAfter = async (send: () => void, what: string) => {
      const before = p.ofType('error').length;
      send();
      bystanderFrame();
      await p.next(() => p.ofType('error').length > before, 10_000, what);
      return p.ofType('error')[before] as ErrorMessage;
    };
    const refusalOf = async (seq: number, send: () => void) => {
      send();
      bystanderFrame();
      return p.next<RefusedMessage>((m) => m.type === 'refused' && m.seq === seq, 10_000, `refusal of seq ${seq}`);
    };

    // Bytes that are not MessagePack.
    expect(await errorAfter(() => p.sendRaw(new Uint8Array([0xc1, 0x00])), 'error for bad bytes')).toMatchObject({ code: 'malformed' });
    // A text frame.
    expect(await errorAfter(() => p.sendRaw('{"type":"frame"}'), 'error for text')).toMatchObject({ code: 'malformed' });
    // A map without the protocol version.
    expect(await errorAfter(() => p.sendRaw(pack({ type: 'frame' })), 'error for no version')).toMatchObject({ code: 'unsupported_version', field: 'v' });
    // A subscriber's message on the producer endpoint.
    expect(await errorAfter(() => p.send({ v: 1, type: 'unsubscribe', ref: 'u', id: 'x' }), 'error for wrong endpoint')).toMatchObject({
      code: 'wrong_endpoint',
      ref: 'u',
    });
    // Invalid operator and solver settings, with full field paths.
    const badOperator = await errorAfter(
      () => p.send({ v: 1, type: 'declare', ref: 'bad-op', stream: { name: 'x1', operator: { kind: 'partial_dft', n: 256, samples: { law: 'uniform', m: 0, seed: 1 } }, solver: { method: 'lasso' } } }),
      'error for a bad operator',
    );
    expect(badOperator).toMatchObject({ code: 'invalid_field', ref: 'bad-op', field: 'stream.operator.samples.m' });
    const badSolver = await errorAfter(
      () => p.send({ v: 1, type: 'declare', ref: 'bad-solver', stream: { name: 'x2', operator: s.operator, solver: { method: 'lasso', maxIterations: -3 } } }),
      'error for bad solver settings',
    );
    expect(badSolver).toMatchObject({ code: 'invalid_field', ref: 'bad-solver', field: 'stream.solver.maxIterations' });

    // Frames: wrong length, a length that is not whole complex numbers, NaN, a bad sigma, an unknown stream.
    const short = await refusalOf(0, () => p.send(frameMessage('target', 0, y.subarray(0, y.length - 2))));
    expect(short).toMatchObject({ stream: 'target', reason: 'wrong_length' });
    expect(short.detail).toContain('1008 bytes');
    expect(short.detail).toContain('1024 bytes');
    const ragged = await refusalOf(1, () => p.sendRaw(pack({ v: 1, type: 'frame', stream: 'target', seq: 1, time: 0, y: new Uint8Array(15) })));
    expect(ragged).toMatchObject({ reason: 'wrong_length' });
    expect(ragged.detail).toContain('not a multiple of 16');
    const withNaN = y.slice();
    withNaN[9] = Number.NaN;
    const nan = await refusalOf(2, () => p.send(frameMessage('target', 2, withNaN)));
    expect(nan).toMatchObject({ reason: 'not_finite' });
    expect(nan.detail).toContain('measurement 4 (imaginary part)');
    const badSigma = await refusalOf(3, () => p.sendRaw(pack({ v: 1, type: 'frame', stream: 'target', seq: 3, time: 0, y: new Uint8Array(y.buffer), sigma: Number.NaN })));
    expect(badSigma).toMatchObject({ reason: 'invalid_field' });
    expect(badSigma.detail).toContain('sigma');
    const unknown = await refusalOf(4, () => p.send(frameMessage('nobody', 4, y)));
    expect(unknown).toMatchObject({ stream: 'nobody', reason: 'unknown_stream' });

    // The same connection still works, and so did the other stream all along.
    p.send(frameMessage('target', 5, y));
    await watcher.next((m) => m.type === 'result' && m.stream === 'target' && m.seq === 5);
    await watcher.next((m) => m.type === 'result' && m.stream === 'bystander' && m.seq === bystanderSeq - 1);
    expect(watcher.ofType('result').filter((r) => r.stream === 'bystander').map((r) => r.seq)).toEqual(Array.from({ length: bystanderSeq }, (_, i) => i));

    const text = daemon.metricsText();
    expect(metricValue(text, 'sparsewire_frames_refused_total', { reason: 'wrong_length' })).toBe(2);
    expect(metricValue(text, 'sparsewire_frames_refused_total', { reason: 'not_finite' })).toBe(1);
    expect(metricValue(text, 'sparsewire_frames_refused_total', { reason: 'unknown_stream' })).toBe(1);
    expect(metricValue(text, 'sparsewire_messages_rejected_total', { code: 'malformed' })).toBe(2);

    // A message over the size limit closes that connection (WebSocket close code 1009) only.
    p.sendRaw(new Uint8Array(100 * 1024));
    await p.whenClosed();
    expect(p.closed?.code).toBe(1009);
    bystanderFrame();
    await watcher.next((m) => m.type === 'result' && m.stream === 'bystander' && m.seq === bystanderSeq - 1);
    other.close();
    watcher.close();
  });
});
