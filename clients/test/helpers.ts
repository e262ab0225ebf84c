import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pino from 'pino';
import { startDaemon, type DaemonConfig, type RunningDaemon } from '../../daemon/index.js';

/** Test plumbing: real daemons on loopback ephemeral ports, scratch directories, bounded waits. */

export function startTestDaemon(overrides: Partial<DaemonConfig> = {}): Promise<RunningDaemon> {
  return startDaemon({
    host: '127.0.0.1',
    port: 0,
    workers: 1,
    stateDir: null,
    staticDir: null,
    logger: pino({ level: 'silent' }),
    ...overrides,
  });
}

export function scratchDir(prefix: string): { path: string; remove: () => void } {
  const path = mkdtempSync(join(tmpdir(), `sparsewire-${prefix}-`));
  return { path, remove: () => rmSync(path, { recursive: true, force: true }) };
}

/** Resolves once `done()` holds; rejects after `timeoutMs` with `what` in the message. */
export function waitUntil(done: () => boolean, what: string, timeoutMs = 20_000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  return new Promise((resolve, reject) => {
    const check = () => {
      if (done()) resolve();
      else if (Date.now() > deadline) reject(new Error(`timed out waiting for ${what}`));
      else setTimeout(check, 10);
    };
    check();
  });
}
