import { mkdir, mkdtemp, rm, writeFile } from 'node:fs/promises';
import http from 'node:http';
import os from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RunningDaemon } from '../index.js';
import { TestClient, declare, frameMessage, metricValue, startTestDaemon, wsUrl } from './helpers.js';
import { dftStream } from './synthetic.js';

// The HTTP side of the port (docs/daemon.md, "Endpoints"): health, metrics in the Prometheus
// text format, the stream list, and static files confined to their directory.

/** A raw GET, so paths reach the daemon exactly as written (fetch would normalise `..`). */
function get(url: string, rawPath: string, method = 'GET'): Promise<{ status: number; type: string; body: string }> {
  const { hostname, port } = new URL(url);
  return new Promise((resolve, reject) => {
    const req = http.request({ hostname, port, path: rawPath, method }, (res) => {
      let body = '';
      res.on('data', (c: Buffer) => (body += c.toString()));
      res.on('end', () => resolve({ status: res.statusCode ?? 0, type: String(res.headers['content-type'] ?? ''), body }));
    });
    req.on('error', reject);
    req.end();
  });
}

describe('HTTP endpoints', () => {
  let daemon: RunningDaemon;
  let dir: string;
  beforeAll(async () => {
    dir = await mkdtemp(path.join(os.tmpdir(), 'sparsewire-static-'));
    await mkdir(path.join(dir, 'web', 'assets'), { recursive: true });
    await writeFile(path.join(dir, 'web', 'index.html'), '<!doctype html><title>dash</title>');
    await writeFile(path.join(dir, 'web', 'assets', 'app.js'), 'console.log(1)');
    await writeFile(path.join(dir, 'web', '.secret'), 'no');
    await writeFile(path.join(dir, 'outside.txt'), 'no');
    daemon = await startTestDaemon({ workers: 1, staticDir: path.join(dir, 'web') });
  });
  afterAll(async () => {
    await daemon.close();
    await rm(dir, { recursive: true, force: true });
  });

  it('serves health, metrics and the stream list', async () => {
    const s = dftStream();
    const p = await TestClient.connect(wsUrl(daemon, '/v1/produce'));
    await declare(p, { name: 'listed', operator: s.operator, solver: { method: 'lasso' } });
    p.send(frameMessage('listed', 0, s.measurements(0)));
    await p.next((m) => m.type === 'ack');

    const health = await get(daemon.url, '/v1/health');
    expect(health.type).toContain('application/json');
    expect(JSON.parse(health.body)).toMatchObject({ status: 'ok', streams: 1, producers: 1, subscribers: 0, workers: 1 });

    const metrics = await get(daemon.url, '/v1/metrics');
    expect(metrics.type).toContain('text/plain; version=0.0.4');
    expect(metrics.body).toContain('# TYPE sparsewire_frames_solved_total counter');
    expect(metricValue(metrics.body, 'sparsewire_frames_solved_total')).toBe(1);
    expect(metricValue(metrics.body, 'sparsewire_solve_seconds_count')).toBe(1);
    expect(metricValue(metrics.body, 'sparsewire_streams')).toBe(1);
    expect(metrics.body).not.toContain('listed'); // stream names never become labels

    const streams = JSON.parse((await get(daemon.url, '/v1/streams')).body) as { streams: Record<string, unknown>[] };
    expect(streams.streams).toEqual([
      expect.objectContaining({
        name: 'listed',
        state: 'open',
        producer_connected: true,
        rows: 64,
        cols: 256,
        next_seq: 1,
        queue_depth: 0,
        frames: { received: 1, refused: 0, dropped: 0, solved: 1 },
        alerts_active: [],
        last_result: expect.objectContaining({ seq: 0, flags: ['cold_start'] }),
        declaration: expect.objectContaining({ name: 'listed', queue: { capacity: 32, policy: 'refuse_new' }, alerts: [] }),
      }),
    ]);
    p.close();
  });

  it('serves dashboard files from its directory only', async () => {
    const index = await get(daemon.url, '/');
    expect(index).toMatchObject({ status: 200, type: 'text/html; charset=utf-8', body: '<!doctype html><title>dash</title>' });
    expect(await get(daemon.url, '/assets/app.js')).toMatchObject({ status: 200, type: 'text/javascript; charset=utf-8' });
    expect((await get(daemon.url, '/assets/app.js', 'HEAD')).body).toBe('');
    for (const p of ['/../outside.txt', '/assets/../../outside.txt', '/%2e%2e/outside.txt', '/.secret', '/missing.js']) {
      expect((await get(daemon.url, p)).status).toBe(404);
    }
    expect((await get(daemon.url, '/v1/health', 'POST')).status).toBe(405);
  });
});
