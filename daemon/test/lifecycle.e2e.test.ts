import { execFileSync } from 'node:child_process';
import { mkdtemp, readFile, rm } from 'node:fs/promises';
import https from 'node:https';
import os from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { RefusedConnection, TestClient, declare, eventually, frameMessage, metricValue, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// Connection lifecycle: dead peers found by ping, graceful shutdown, TLS.

describe('heartbeat', () => {
  it('terminates a peer that stops answering pings and keeps one that answers', async () => {
    // Long enough that a busy test machine answers in time; the dead peer still goes within two.
    const daemon = await startTestDaemon({ workers: 1, heartbeatMs: 300 });
    try {
      // ws answers pings automatically unless autoPong is off: that client plays a dead peer.
      const dead = await TestClient.connect(wsUrl(daemon, '/v1/watch'), { autoPong: false });
      const alive = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
      await dead.whenClosed();
      expect(dead.closed?.code).toBe(1006); // terminated, no close handshake
      await eventually(() => metricValue(daemon.metricsText(), 'sparsewire_connections_closed_total', { reason: 'no_pong' }) === 1, 'the dead peer is counted');
      // Several more heartbeats later the answering client is still connected.
      await new Promise((r) => setTimeout(r, 1000));
      expect(alive.closed).toBeUndefined();
      alive.close();
    } finally {
      await daemon.close();
    }
  });
});

describe('graceful shutdown', () => {
  it('stops accepting, finishes accepted frames, flushes, then closes with the reason', async () => {
    const daemon = await startTestDaemon({ workers: 1 });
    const s = dftStream(4096, 256, [5, 100, 333, 1600, 3901]);
    const w = await TestClient.connect(wsUrl(daemon, '/v1/watch'));
    w.send({ v: 1, type: 'subscribe', ref: 's', streams: '*', want: ['coefficients'], when_behind: 'drop_with_notice' });
    await w.next((m) => m.type === 'subscribed');
    const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    await declare(p, { name: 'last', operator: s.operator, solver: { method: 'lasso' } });
    for (let t = 0; t < 10; t++) p.send(frameMessage('last', t, s.measurements(t)));
    await eventually(() => metricValue(daemon.metricsText(), 'sparsewire_frames_received_total') === 10, 'the frames arrived');
    // Ten cold-ish solves of n = 4096 take far longer than their arrival: work is still pending.
    expect(daemon.core.pipeline.queuedFrames()).toBeGreaterThan(0);

    const closing = daemon.close('maintenance window');
    // New connections are refused from now on.
    const late = await TestClient.connect(wsUrl(daemon, '/v1/watch')).then(
      () => 'connected',
      (e: unknown) => (e instanceof RefusedConnection ? e.status : 'no listener'),
    );
    expect([503, 'no listener']).toContain(late);
    await closing;

    // Every accepted frame was solved and delivered, and acknowledged, before the connections closed.
    expect(w.ofType('result').map((r) => r.seq)).toEqual(Array.from({ length: 10 }, (_, t) => t));
    expect(p.ofType('ack').reduce((n, a) => n + a.solved, 0)).toBe(10);
    await w.whenClosed();
    await p.whenClosed();
    expect(w.closed).toEqual({ code: 1001, reason: 'maintenance window' });
    expect(p.closed).toEqual({ code: 1001, reason: 'maintenance window' });
  });
});

describe('TLS', () => {
  it('serves HTTPS and WSS from certificate files', async () => {
    const dir = await mkdtemp(path.join(os.tmpdir(), 'sparsewire-tls-'));
    try {
      const cert = path.join(dir, 'cert.pem');
      const key = path.join(dir, 'key.pem');
      // A throwaway self-signed certificate for 127.0.0.1 (OpenSSL's req command).
      execFileSync('openssl', ['req', '-x509', '-newkey', 'rsa:2048', '-nodes', '-keyout', key, '-out', cert, '-days', '1', '-subj', '/CN=127.0.0.1', '-addext', 'subjectAltName=IP:127.0.0.1'], { stdio: 'ignore' });
      const ca = await readFile(cert);
      const daemon = await startTestDaemon({ workers: 1, tls: { cert, key } });
      try {
        expect(daemon.url).toMatch(/^https:\/\/127\.0\.0\.1:\d+$/);
        const health = await new Promise<{ status: number; body: string }>((resolve, reject) => {
          https.get(`${daemon.url}/v1/health`, { ca }, (res) => {
            let body = '';
            res.on('data', (c: Buffer) => (body += c.toString()));
            res.on('end', () => resolve({ status: res.statusCode ?? 0, body }));
          }).on('error', reject);
        });
        expect(health.status).toBe(200);
        expect(JSON.parse(health.body)).toMatchObject({ status: 'ok' });
        const c = await TestClient.connect(wsUrl(daemon, '/v1/watch'), { ca });
        expect(c.ws.url.startsWith('wss://')).toBe(true);
        c.close();
      } finally {
        await daemon.close();
      }
    } finally {
      await rm(dir, { recursive: true, force: true });
    }
  });
});
