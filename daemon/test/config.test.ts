import { describe, expect, it } from 'vitest';
import { existsSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { DEFAULT_LIMITS, defaultStaticDir, resolveConfig } from '../config.js';

// Configuration defaults and validation (docs/daemon.md, "Configuration").
describe('resolveConfig', () => {
  it('fills defaults', () => {
    const c = resolveConfig({ stateDir: null, staticDir: null });
    expect(c).toMatchObject({ host: '127.0.0.1', port: 0, tokens: [], heartbeatMs: 15_000, limits: DEFAULT_LIMITS, logLevel: 'info' });
    expect(c.workers).toBeGreaterThanOrEqual(1);
    expect(resolveConfig({}).stateDir).toMatch(/\.sparsewire-state$/);
  });

  it('names the setting that is wrong', () => {
    expect(() => resolveConfig({ port: 70000 })).toThrow(/^port must be/);
    expect(() => resolveConfig({ workers: 0 })).toThrow(/^workers must be/);
    expect(() => resolveConfig({ limits: { ...DEFAULT_LIMITS, outboxLowBytes: 2e6 } })).toThrow(/outboxLowBytes < outboxHighBytes/);
    expect(() => resolveConfig({ limits: { ...DEFAULT_LIMITS, maxMessageBytes: 64 * 1024 * 1024 } })).toThrow(/maxMessageBytes/);
    expect(() => resolveConfig({ logLevel: 'loud' })).toThrow(/logLevel/);
    expect(() => resolveConfig({ tokens: [{ token: 't', roles: ['root' as never] }] })).toThrow(/tokens\[0\]\.roles/);
    expect(() => resolveConfig({ tokens: [{ token: '', roles: ['watch'] }] })).toThrow(/tokens\[0\]\.token/);
  });
});

describe('defaultStaticDir', () => {
  it('finds the dashboard beside the daemon whatever the working directory', () => {
    const before = process.cwd();
    try {
      process.chdir(os.tmpdir());
      const dir = defaultStaticDir();
      expect(dir).not.toBeNull();
      expect(existsSync(path.join(dir!, 'index.html'))).toBe(true);
    } finally {
      process.chdir(before);
    }
  });
});
