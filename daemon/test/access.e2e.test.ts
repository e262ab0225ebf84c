import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { ErrorMessage } from '../../protocol/index.js';
import type { RunningDaemon } from '../index.js';
import { RefusedConnection, TestClient, declare, frameMessage, metricValue, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// Access control against its definition (docs/daemon.md, "Access"): tokens carry roles and
// stream patterns, checked at the handshake and on every message; refusals say why.

const PRODUCE = 'p-7f3a';
const WATCH = 'w-19c2';
const ADMIN = 'a-55e0';

describe('access tokens', () => {
  let daemon: RunningDaemon;
  const s = dftStream();
  beforeAll(async () => {
    daemon = await startTestDaemon({
      workers: 1,
      tokens: [
        { token: PRODUCE, roles: ['produce'], streams: ['plant.*'], name: 'plant-producer' },
        { token: WATCH, roles: ['watch'], streams: ['plant.*'] },
        { token: ADMIN, roles: ['admin'] },
      ],
      limits: { maxConnectionsPerToken: 3 } as never,
    });
  });
  afterAll(() => daemon.close());

  const refusal = async (url: string, headers?: Record<string, string>) => {
    const err = await TestClient.connect(url, headers ? { headers } : {}).then(
      (c) => {
        c.close();
        return undefined;
      },
      (e: unknown) => e,
    );
    expect(err).toBeInstanceOf(RefusedConnection);
    const r = err as RefusedConnection;
    return { status: r.status, ...(JSON.parse(r.body) as { error: string; detail: string }) };
  };

  it('refuses connections without a valid token, or without the role, saying why', async () => {
    expect(await refusal(wsUrl(daemon, '/v1/produce'))).toMatchObject({ status: 401, error: 'token_missing' });
    expect(await refusal(wsUrl(daemon, '/v1/watch', 'guess'))).toMatchObject({ status: 401, error: 'token_unknown' });
    expect(await refusal(wsUrl(daemon, '/v1/produce', WATCH))).toMatchObject({ status: 403, error: 'role_missing' });
    expect(await refusal(wsUrl(daemon, '/v1/watch', PRODUCE))).toMatchObject({ status: 403, error: 'role_missing' });
    expect(await refusal(wsUrl(daemon, '/v1/elsewhere', ADMIN))).toMatchObject({ status: 404, error: 'unknown_path' });
    const text = daemon.metricsText();
    expect(metricValue(text, 'sparsewire_connections_refused_total', { reason: 'token_missing' })).toBe(1);
    expect(metricValue(text, 'sparsewire_connections_refused_total', { reason: 'role_missing' })).toBe(2);
  });

  it('checks the stream pattern on every message', async () => {
    // The header form of the token.
    const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'), { headers: { Authorization: `Bearer ${PRODUCE}` } });
    await declare(p, { name: 'plant.line1', operator: s.operator, solver: { method: 'lasso' } });
    p.send({ v: 1, type: 'declare', ref: 'x', stream: { name: 'office.printer', operator: s.operator, solver: { method: 'lasso' } } });
    expect(await p.next<ErrorMessage>((m) => m.type === 'error' && m.ref === 'x')).toMatchObject({ code: 'forbidden', field: 'stream.name' });
    p.send(frameMessage('office.printer', 0, s.measurements(0)));
    expect(await p.next((m) => m.type === 'refused' && m.stream === 'office.printer')).toMatchObject({ reason: 'forbidden' });

    // An admin declares a stream outside the watcher's patterns; the watcher never sees it.
    const admin = await TestClient.connect(wsUrl(daemon, '/v1/produce', ADMIN));
    await declare(admin, { name: 'office.hvac', operator: s.operator, solver: { method: 'lasso' } });
    const w = await TestClient.connect(wsUrl(daemon, '/v1/watch', WATCH));
    w.send({ v: 1, type: 'subscribe', ref: 'ok', streams: '*', want: ['quality'], when_behind: 'keep_latest' });
    const subscribed = await w.next((m) => m.type === 'subscribed');
    expect(subscribed.type === 'subscribed' && subscribed.streams.map((d) => d.name)).toEqual(['plant.line1']);
    w.send({ v: 1, type: 'subscribe', ref: 'no', streams: ['plant.*', 'office.hvac'], want: ['quality'], when_behind: 'keep_latest' });
    expect(await w.next<ErrorMessage>((m) => m.type === 'error' && m.ref === 'no')).toMatchObject({ code: 'forbidden', field: 'streams[1]' });

    admin.send(frameMessage('office.hvac', 0, s.measurements(0)));
    p.send(frameMessage('plant.line1', 0, s.measurements(0)));
    await w.next((m) => m.type === 'result' && m.stream === 'plant.line1');
    await admin.next((m) => m.type === 'ack' && m.stream === 'office.hvac');
    expect(w.ofType('result').map((r) => r.stream)).toEqual(['plant.line1']);

    // HTTP endpoints: metrics and streams need a watching token and list only what it may see.
    expect((await fetch(`${daemon.url}/v1/metrics`)).status).toBe(401);
    const listed = await fetch(`${daemon.url}/v1/streams`, { headers: { Authorization: `Bearer ${WATCH}` } });
    const body = (await listed.json()) as { streams: { name: string }[] };
    expect(body.streams.map((x) => x.name)).toEqual(['plant.line1']);
    expect((await fetch(`${daemon.url}/v1/health`)).status).toBe(200);

    // Connections per token are limited (3 here: p is the first).
    const more = [await TestClient.connect(wsUrl(daemon, '/v1/produce', PRODUCE)), await TestClient.connect(wsUrl(daemon, '/v1/produce', PRODUCE))];
    expect(await refusal(wsUrl(daemon, '/v1/produce', PRODUCE))).toMatchObject({ status: 429, error: 'too_many_connections' });
    for (const c of [...more, p, admin, w]) c.close();
  });
});
