import { execFileSync } from 'node:child_process';
import { mkdtemp, readFile, rm } from 'node:fs/promises';
import https from 'node:https';
import os from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { DEFAULT_LIMITS } from '../index.js';
import { RefusedConnection, TestClient, declare, eventually, frameMessage, metricValue, startTestDaemon, wsUrl } from './helpers.js';
import { SlowSubscriber } from '../../loadtest/subscribers.js';
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

describe('heartbeat and backlogs', () => {
  it('spares a subscriber that reads slowly through a backlog and still ends one that stopped reading', async () => {
    // Our ping waits behind the results queued before it: a subscriber reading 96 KiB/s through
    // ~500 KB of backlog needs about five seconds to reach it, more than two 2 s heartbeats, yet
    // it is alive. One that reads nothing (and never answers) is still found dead, once the
    // backlog ahead of its ping would have taken a peer reading minReadBytesPerSecond (64 KiB/s
    // here) to read. (The slow reader pauses its socket up to ~0.7 s at a time: within half a beat.)
    const daemon = await startTestDaemon({ workers: 1, heartbeatMs: 2000, limits: { ...DEFAULT_LIMITS, minReadBytesPerSecond: 64 * 1024 } });
    const slow = await SlowSubscriber.open({ url: daemon.url }, 'backlog', 'drop_with_notice', 96 * 1024);
    const stalled = await TestClient.connect(wsUrl(daemon, '/v1/watch'), { autoPong: false });
    try {
      stalled.send({ v: 1, type: 'subscribe', ref: 's', streams: 'backlog', want: ['coefficients', 'measurements'], when_behind: 'drop_with_notice' });
      await stalled.next((m) => m.type === 'subscribed');
      stalled.ws.pause();
      const s = dftStream(1024, 512, [5, 100, 333, 900]);
      const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
      await declare(p, { name: 'backlog', operator: s.operator, solver: { method: 'omp', sparsity: 4 }, queue: { capacity: 128, policy: 'refuse_new' } });
      for (let t = 0; t < 60; t++) p.send(frameMessage('backlog', t, s.measurements(t)));
      const noPong = () => metricValue(daemon.metricsText(), 'sparsewire_connections_closed_total', { endpoint: 'watch', reason: 'no_pong' });
      await eventually(() => slow.counts.results === 60, 'the slow subscriber read every result', 30_000);
      expect(slow.closedByDaemon).toEqual([]);
      await eventually(() => noPong() >= 1, 'the stalled subscriber is found dead', 30_000);
      expect(noPong()).toBe(1);
      await eventually(() => daemon.subscriberOutboxes().length === 1, 'its connection is gone');
      // The slow reader answers pings again now that its backlog is read: still there two beats on.
      await new Promise((r) => setTimeout(r, 4500));
      expect(slow.closedByDaemon).toEqual([]);
      expect(noPong()).toBe(1);
      p.close();
    } finally {
      await slow.close();
      await daemon.close();
    }
  }, 60_000);
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
