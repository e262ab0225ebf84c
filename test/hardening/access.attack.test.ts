import fc from 'fast-check';
import { randomBytes } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import https from 'node:https';
import os from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { eventually } from '../../daemon/test/helpers.js';
import { dftStream } from '../../daemon/test/synthetic.js';
import { encode, float64ToBin, matchesStreamPattern, type Message } from '../../protocol/index.js';
import { DaemonProcess } from './support/daemonProcess.js';
import { byScale, FUZZ_SEED, recordFigures } from './support/scale.js';
import { makeSelfSignedCertificate } from './support/tls.js';
import { RawSocket, rawHttp } from './support/wire.js';

// Access control under attack (docs/daemon.md, "Access"; docs/protocol.md, "Transport": "the
// daemon checks [roles and stream patterns] at connect time and on every message"): a token
// scoped to some streams tries, message by message, to declare, take over, feed, close and watch
// streams outside its scope; bursts try to slip past the per-connection and per-token limits;
// tokens must never reach the logs; TLS works with a certificate made in the test.

const token = (label: string) => `${label}-${randomBytes(12).toString('hex')}`;
const SCOPED = token('scoped');
const ADMIN = token('admin');
const BURST = token('burst');
const LIMITS = { maxStreamsPerConnection: 4, maxConnectionsPerToken: 5, maxSubscriptionsPerConnection: 3 };

const feed = dftStream(256, 64);
const declaration = (name: string) => ({ name, operator: feed.operator, solver: { method: 'lasso' as const, maxIterations: 100 } });
const FORBIDDEN = ['office.x', 'office.y'];
const ALLOWED = ['plant.a', 'plant.b'];
const inScope = (name: string) => matchesStreamPattern('plant.*', name);

/** Every stream name a message from the daemon mentions. */
function streamsMentioned(m: Message): string[] {
  switch (m.type) {
    case 'subscribed':
      return m.streams.map((d) => d.name);
    case 'stream_event':
      return [m.stream, ...(m.declaration ? [m.declaration.name] : [])];
    case 'result':
    case 'alert':
    case 'missed':
    case 'declared':
    case 'closed':
    case 'ack':
    case 'credit':
      return [m.stream];
    default:
      return [];
  }
}

describe('access control under attack', () => {
  let daemon: DaemonProcess;
  const ws = () => daemon.url.replace(/^http/, 'ws');
  const as = (who: string) => ({ headers: { Authorization: `Bearer ${who}` } });

  beforeAll(async () => {
    daemon = await DaemonProcess.fixture({
      workers: 1,
      logLevel: 'warn',
      tokens: [
        { token: SCOPED, roles: ['produce', 'watch'], streams: ['plant.*'], name: 'scoped' },
        { token: ADMIN, roles: ['admin'], name: 'admin' },
        { token: BURST, roles: ['produce', 'watch'], name: 'burst' },
      ],
      limits: LIMITS as never,
    });
  });
  afterAll(async () => {
    await daemon?.stop();
  });

  it('a scoped token is checked on every message: it never declares, takes over, feeds, closes or sees a stream outside its scope', async () => {
    // The admin's streams outside the scope, fed all along.
    const admin = await RawSocket.open(`${ws()}/v1/produce`, as(ADMIN));
    for (const name of FORBIDDEN) {
      admin.send(encode({ v: 1, type: 'declare', ref: name, stream: declaration(name) }));
      await admin.until(() => admin.received.some((m) => m.type === 'declared' && m.stream === name), `admin declares ${name}`);
    }
    let adminSeq = 0;
    const adminFrame = () => {
      for (const name of FORBIDDEN) admin.send(encode({ v: 1, type: 'frame', stream: name, seq: adminSeq, time: adminSeq, y: float64ToBin(feed.measurements(adminSeq)) }));
      adminSeq++;
    };

    const producer = await RawSocket.open(`${ws()}/v1/produce`, as(SCOPED));
    const watcher = await RawSocket.open(`${ws()}/v1/watch`, as(SCOPED));
    const name = fc.constantFrom(...ALLOWED, ...FORBIDDEN, 'plant', 'plantx', 'Plant.a', 'office.x.plant');
    const pattern = fc.constantFrom('*', 'plant.*', 'office.*', 'office.x', '*.x', 'p*', 'o*', '*a*', 'plant.a');
    const op = fc.oneof(
      name.map((n) => encode({ v: 1, type: 'declare', ref: `d-${n}`, stream: declaration(n) })),
      fc.tuple(name, fc.nat(10_000)).map(([n, seq]) => encode({ v: 1, type: 'frame', stream: n, seq, time: seq, y: float64ToBin(feed.measurements(seq % 7)) })),
      name.map((n) => encode({ v: 1, type: 'close', ref: `c-${n}`, stream: n })),
      fc.array(pattern, { minLength: 1, maxLength: 3 }).map((ps) => encode({ v: 1, type: 'subscribe', ref: 's', streams: ps, want: ['quality', 'coefficients', 'measurements', 'alerts'], when_behind: 'keep_latest' })),
      pattern.map((p) => encode({ v: 1, type: 'subscribe', ref: 's1', streams: p, want: ['quality', 'signal'], when_behind: 'drop_with_notice' })),
      fc.constantFrom('sub-1', 'sub-2', 'sub-3').map((id) => encode({ v: 1, type: 'unsubscribe', ref: 'u', id })),
    );
    const OPS = byScale({ ci: 400, report: 5000, soak: 50_000 });
    const ops = fc.sample(op, { seed: FUZZ_SEED, numRuns: OPS });
    for (let i = 0; i < ops.length; i++) {
      // Every op goes to both endpoints: the wrong one must refuse it too.
      producer.send(ops[i]!);
      watcher.send(ops[i]!);
      if (i % 20 === 0) adminFrame();
    }
    for (let k = 0; k < 5; k++) adminFrame();
    const probe = (s: RawSocket, ref: string) => {
      s.send(encode({ v: 1, type: 'unsubscribe', ref, id: 'none' }));
      return s.until(() => s.received.some((m) => m.type === 'error' && m.ref === ref), `probe ${ref}`, 60_000);
    };
    await Promise.all([probe(producer, 'end-p'), probe(watcher, 'end-w')]);
    // Every admin frame is accounted for (solved, dropped, or refused when it outran its credits).
    const adminAccounted = () => admin.received.reduce((n, m) => n + (m.type === 'ack' ? m.solved + m.dropped : m.type === 'refused' ? 1 : 0), 0);
    await admin.until(() => adminAccounted() >= adminSeq * FORBIDDEN.length, 'admin frames done', 120_000);
    expect(admin.received.filter((m) => m.type === 'refused' && m.reason !== 'queue_full')).toEqual([]);

    // Nothing outside the scope reached or moved through the scoped connections.
    const leaks = [...producer.received, ...watcher.received].flatMap(streamsMentioned).filter((s) => !inScope(s));
    expect(leaks).toEqual([]);
    const refusedForbidden = producer.received.filter((m) => m.type === 'refused' && !inScope(m.stream));
    expect(refusedForbidden.every((m) => m.type === 'refused' && m.reason === 'forbidden')).toBe(true);
    const forbiddenErrors = [...producer.received, ...watcher.received].filter((m) => m.type === 'error' && m.code === 'forbidden').length;
    expect(forbiddenErrors).toBeGreaterThan(0);
    // The admin kept its streams: never taken over, every frame solved.
    expect(admin.received.filter((m) => m.type === 'error')).toEqual([]);
    const listed = (await (await fetch(`${daemon.url}/v1/streams`, { headers: { Authorization: `Bearer ${ADMIN}` } })).json()) as { streams: Array<{ name: string; producer_connected: boolean }> };
    for (const n of FORBIDDEN) expect(listed.streams.find((s) => s.name === n)).toMatchObject({ producer_connected: true });
    // The HTTP view of the scoped token lists only its streams.
    const scopedList = (await (await fetch(`${daemon.url}/v1/streams`, { headers: { Authorization: `Bearer ${SCOPED}` } })).json()) as { streams: Array<{ name: string }> };
    expect(scopedList.streams.map((s) => s.name).filter((n) => !inScope(n))).toEqual([]);
    for (const s of [producer, watcher, admin]) s.close();
    recordFigures('access: scoped token, message by message', {
      messages_per_endpoint: ops.length,
      refused_forbidden_frames: refusedForbidden.length,
      forbidden_errors: forbiddenErrors,
      out_of_scope_messages_seen: leaks.length,
      admin_streams_taken_over: 0,
    });
  });

  it('bursts do not slip past the limits on streams per connection, subscriptions per connection and connections per token', async () => {
    // 20 declarations sent at once on one connection.
    const p = await RawSocket.open(`${ws()}/v1/produce`, as(BURST));
    for (let i = 0; i < 20; i++) p.send(encode({ v: 1, type: 'declare', ref: `b${i}`, stream: declaration(`burst.s${i}`) }));
    await p.until(() => p.received.filter((m) => m.type === 'declared' || m.type === 'error').length === 20, 'every declaration answered', 60_000);
    const declared = p.received.filter((m) => m.type === 'declared').length;
    const limited = p.received.filter((m) => m.type === 'error' && m.code === 'limit_reached').length;
    expect(declared).toBe(LIMITS.maxStreamsPerConnection);
    expect(limited).toBe(20 - LIMITS.maxStreamsPerConnection);

    // 10 subscriptions at once.
    const w = await RawSocket.open(`${ws()}/v1/watch`, as(BURST));
    for (let i = 0; i < 10; i++) w.send(encode({ v: 1, type: 'subscribe', ref: `s${i}`, streams: 'burst.*', want: ['quality'], when_behind: 'keep_latest' }));
    await w.until(() => w.received.filter((m) => m.type === 'subscribed' || m.type === 'error').length === 10, 'every subscription answered');
    expect(w.received.filter((m) => m.type === 'subscribed').length).toBe(LIMITS.maxSubscriptionsPerConnection);

    // 40 connections at once with one token (two are open already).
    const attempts = await Promise.allSettled(Array.from({ length: 40 }, (_, i) => RawSocket.open(`${ws()}/v1/${i % 2 ? 'watch' : 'produce'}`, as(BURST))));
    const opened = attempts.filter((a) => a.status === 'fulfilled').length;
    expect(opened).toBe(LIMITS.maxConnectionsPerToken - 2);
    expect(attempts.filter((a) => a.status === 'rejected').every((a) => String((a as PromiseRejectedResult).reason).includes('429'))).toBe(true);
    for (const a of attempts) if (a.status === 'fulfilled') a.value.close();
    p.close();
    w.close();
    // Once they are gone the token may connect again.
    await eventually(async () => (await RawSocket.open(`${ws()}/v1/watch`, as(BURST)).then((s) => (s.close(), true), () => false)), 'a slot frees up');
    recordFigures('access: bursts against the limits', {
      declarations_at_once: 20,
      declared: declared,
      stream_limit: LIMITS.maxStreamsPerConnection,
      subscriptions_at_once: 10,
      subscription_limit: LIMITS.maxSubscriptionsPerConnection,
      connections_at_once: 40,
      connections_opened: opened + 2,
      connection_limit: LIMITS.maxConnectionsPerToken,
    });
  });
});

describe('tokens in the logs', () => {
  it('sparsewire serve at trace level never writes a token, presented right or wrong, in a header or a query', async () => {
    const dir = mkdtempSync(path.join(os.tmpdir(), 'sparsewire-tokens-'));
    const producerToken = token('prod');
    const watcherToken = token('watch');
    const wrongToken = token('wrong');
    const tokensFile = path.join(dir, 'tokens.json');
    writeFileSync(tokensFile, JSON.stringify([
      { token: producerToken, roles: ['produce'], streams: ['plant.*'], name: 'plant-producer' },
      { token: watcherToken, roles: ['watch'] },
    ]));
    const daemon = await DaemonProcess.serve(['--port', '0', '--no-state', '--no-static', '--workers', '1', '--log-level', 'trace', '--tokens-file', tokensFile, '--max-connections-per-token', '2']);
    try {
      const base = daemon.url.replace(/^http/, 'ws');
      const p = await RawSocket.open(`${base}/v1/produce`, { headers: { Authorization: `Bearer ${producerToken}` } });
      p.send(encode({ v: 1, type: 'declare', ref: 'd', stream: declaration('plant.a') }));
      await p.until(() => p.received.some((m) => m.type === 'declared'), 'declared');
      p.send(encode({ v: 1, type: 'frame', stream: 'plant.a', seq: 0, time: 0, y: float64ToBin(feed.measurements(0)) }));
      p.send(encode({ v: 1, type: 'declare', ref: 'x', stream: declaration('office.x') }));
      p.send(new Uint8Array([0xc1]));
      const w = await RawSocket.open(`${base}/v1/watch?token=${watcherToken}`);
      w.send(encode({ v: 1, type: 'subscribe', ref: 's', streams: '*', want: ['quality'], when_behind: 'keep_latest' }));
      await w.until(() => w.received.some((m) => m.type === 'result'), 'a result');
      // Refusals of every kind, with the token in the header and in the query.
      const refusals = [
        RawSocket.open(`${base}/v1/produce?token=${wrongToken}`),
        RawSocket.open(`${base}/v1/produce`, { headers: { Authorization: `Bearer ${wrongToken}` } }),
        RawSocket.open(`${base}/v1/produce?token=${watcherToken}`),
        RawSocket.open(`${base}/v1/elsewhere?token=${producerToken}`),
        RawSocket.open(`${base}/v1/produce?token=${producerToken}`), // second connection: allowed
        RawSocket.open(`${base}/v1/produce?token=${producerToken}`), // third: over the limit
      ];
      await Promise.allSettled(refusals);
      await fetch(`${daemon.url}/v1/metrics?token=${wrongToken}`);
      await fetch(`${daemon.url}/v1/streams?token=${watcherToken}`);
      await fetch(`${daemon.url}/v1/streams`, { headers: { Authorization: `Bearer ${producerToken}` } });
      await rawHttp(daemon.port, `GET //x:99999/v1/streams?token=${watcherToken} HTTP/1.1\r\nHost: x\r\nConnection: close\r\n\r\n`);
      await rawHttp(daemon.port, `GET //x:99999/v1/produce?token=${producerToken} HTTP/1.1\r\nHost: x\r\nUpgrade: websocket\r\nConnection: Upgrade\r\nSec-WebSocket-Key: dGhlIHNhbXBsZSBub25jZQ==\r\nSec-WebSocket-Version: 13\r\n\r\n`);
      for (const r of refusals) r.then((s) => s.close(), () => undefined);
      p.close();
      w.close();
      await new Promise((r) => setTimeout(r, 300));
    } finally {
      await daemon.stop();
      rmSync(dir, { recursive: true, force: true });
    }
    const log = daemon.output();
    // The log did record all this (else the check below would prove nothing)...
    expect(log).toContain('connection refused');
    expect(log).toContain('connection accepted');
    expect(log).toContain('plant-producer');
    // ...and no token appears in it.
    for (const t of [producerToken, watcherToken, wrongToken]) expect(log.includes(t), `token ${t.split('-')[0]} in the log`).toBe(false);
    recordFigures('access: tokens in the logs', { log_lines: log.split('\n').length, tokens_presented: 3, tokens_found_in_log: 0 });
  });
});

describe('TLS', () => {
  it('serves WSS and HTTPS with a certificate made in the test; plain and untrusted connections fail', async () => {
    const tls = makeSelfSignedCertificate();
    const secret = token('tls');
    const daemon = await DaemonProcess.fixture({ workers: 1, logLevel: 'warn', tls: { cert: tls.cert, key: tls.key }, tokens: [{ token: secret, roles: ['produce', 'watch'] }] });
    try {
      expect(daemon.url.startsWith('https://')).toBe(true);
      const base = daemon.url.replace(/^https/, 'wss');
      const trusted = { ca: tls.pem, headers: { Authorization: `Bearer ${secret}` } };
      const w = await RawSocket.open(`${base}/v1/watch`, trusted);
      w.send(encode({ v: 1, type: 'subscribe', ref: 's', streams: '*', want: ['coefficients'], when_behind: 'keep_latest' }));
      const p = await RawSocket.open(`${base}/v1/produce`, trusted);
      p.send(encode({ v: 1, type: 'declare', ref: 'd', stream: declaration('tls.s') }));
      await p.until(() => p.received.some((m) => m.type === 'declared'), 'declared over TLS');
      p.send(encode({ v: 1, type: 'frame', stream: 'tls.s', seq: 0, time: 0, y: float64ToBin(feed.measurements(0)) }));
      await w.until(() => w.received.some((m) => m.type === 'result'), 'a result over TLS');
      const health = await new Promise<number>((resolve, reject) => {
        https.get(`${daemon.url}/v1/health`, { ca: tls.pem }, (res) => (res.resume(), resolve(res.statusCode ?? 0))).on('error', reject);
      });
      expect(health).toBe(200);
      // Without trusting the certificate, over plain WebSocket, or with a wrong token: refused.
      await expect(RawSocket.open(`${base}/v1/watch`, { headers: trusted.headers })).rejects.toThrow();
      await expect(RawSocket.open(`${base.replace('wss', 'ws')}/v1/watch`, { headers: trusted.headers })).rejects.toThrow();
      await expect(RawSocket.open(`${base}/v1/watch`, { ca: tls.pem, headers: { Authorization: 'Bearer nope' } })).rejects.toThrow('401');
      expect(daemon.alive).toBe(true);
      p.close();
      w.close();
      recordFigures('access: TLS with a self-signed certificate', { wss_ok: 1, https_ok: 1, untrusted_refused: 1, plain_refused: 1, wrong_token_refused: 1 });
    } finally {
      await daemon.stop();
      rmSync(path.dirname(tls.cert), { recursive: true, force: true });
    }
  });
});
