import { spawn } from 'node:child_process';
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import os from 'node:os';
import path from 'node:path';
import { createInterface } from 'node:readline';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEFAULT_PORT, serveHelp, serveOptions } from '../../cli/serve.js';

// `sparsewire serve`: settings from flags, then SPARSEWIRE_* environment, then --config, then
// defaults; and a real process that prints its address, serves, and stops on SIGTERM.

describe('serve options', () => {
  let dir: string;
  beforeAll(async () => {
    dir = await mkdtemp(path.join(os.tmpdir(), 'sparsewire-serve-'));
    await writeFile(path.join(dir, 'config.json'), JSON.stringify({ port: 9001, workers: 3, logLevel: 'warn', limits: { outboxHighBytes: 2_000_000 }, tokens: [{ token: 't', roles: ['admin'] }] }));
    await writeFile(path.join(dir, 'tokens.json'), JSON.stringify([{ token: 'u', roles: ['watch'] }]));
    await writeFile(path.join(dir, 'bad.json'), JSON.stringify({ prot: 1 }));
  });
  afterAll(() => rm(dir, { recursive: true, force: true }));

  it('takes a flag over the environment over the config file over the default', () => {
    const config = path.join(dir, 'config.json');
    expect(serveOptions([], {})).toEqual({ port: DEFAULT_PORT });
    expect(serveOptions(['--config', config], {})).toMatchObject({ port: 9001, workers: 3, logLevel: 'warn', limits: { outboxHighBytes: 2_000_000 }, tokens: [{ token: 't' }] });
    expect(serveOptions(['--config', config], { SPARSEWIRE_PORT: '9002', SPARSEWIRE_TOKENS_FILE: path.join(dir, 'tokens.json') })).toMatchObject({ port: 9002, tokens: [{ token: 'u' }] });
    expect(serveOptions(['--config', config, '--port', '9003', '--outbox-high-bytes', '5'], { SPARSEWIRE_PORT: '9002' })).toMatchObject({ port: 9003, limits: { outboxHighBytes: 5 } });
    expect(serveOptions(['--no-state', '--no-static'], {})).toMatchObject({ stateDir: null, staticDir: null });
    expect(serveOptions([], { SPARSEWIRE_CONFIG: config })).toMatchObject({ port: 9001 });
  });

  it('names what is wrong', () => {
    expect(() => serveOptions(['--port', 'eighty'], {})).toThrow('--port must be a whole number, got "eighty"');
    expect(() => serveOptions([], { SPARSEWIRE_WORKERS: '-1' })).toThrow('SPARSEWIRE_WORKERS must be a whole number');
    expect(() => serveOptions(['--config', path.join(dir, 'bad.json')], {})).toThrow('unknown setting "prot"');
    expect(() => serveOptions(['--tls-cert', 'c.pem'], {})).toThrow('TLS needs both');
    expect(() => serveOptions(['--frobnicate'], {})).toThrow();
  });

  it('explains every option in --help', () => {
    const help = serveHelp();
    for (const flag of ['--host', '--port', '--workers', '--state-dir', '--tokens-file', '--tls-cert', '--static-dir', '--heartbeat-ms', '--outbox-high-bytes', '--config', '--log-level']) {
      expect(help).toContain(flag);
    }
    expect(help).toContain('SPARSEWIRE_PORT');
    expect(serveOptions(['--help'], {})).toBe('help');
  });
});

describe('serve process', () => {
  it('prints its address, answers health, and stops cleanly on SIGTERM', async () => {
    const child = spawn(
      process.execPath,
      ['--import', 'tsx', '--input-type=module', '-e', "import { serveCommand } from './cli/serve.ts'; process.exitCode = await serveCommand(process.argv.slice(1));", '--', '--port', '0', '--no-state', '--workers', '1', '--log-level', 'warn'],
      { cwd: path.resolve(import.meta.dirname, '../..'), stdio: ['ignore', 'pipe', 'pipe'] },
    );
    const lines = createInterface({ input: child.stdout });
    const url = await new Promise<string>((resolve, reject) => {
      lines.on('line', (line) => {
        const m = /^sparsewire listening on (http:\/\/127\.0\.0\.1:\d+)$/.exec(line);
        if (m) resolve(m[1]!);
      });
      child.once('exit', (code) => reject(new Error(`serve exited early with ${code}`)));
    });
    const health = await fetch(`${url}/v1/health`);
    expect(health.status).toBe(200);
    expect(await health.json()).toMatchObject({ status: 'ok', workers: 1 });
    const exit = new Promise<number | null>((resolve) => child.once('exit', resolve));
    child.kill('SIGTERM');
    expect(await exit).toBe(0);
  });
});
