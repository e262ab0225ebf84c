import { type ChildProcess, spawn } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';

/**
 * Child processes for cluster tests: a real nats-server with JetStream on a loopback port, and
 * sparsewire nodes (`bin/sparsewire.js serve --cluster ...`). Everything started here is killed
 * by `stopAll`, also when a test fails.
 */

const CANDIDATES = ['/usr/sbin/nats-server', '/usr/bin/nats-server', '/usr/local/bin/nats-server'];

/** Path of the nats-server binary, or undefined when it is not installed. */
export function findNatsServer(): string | undefined {
  if (process.env.SPARSEWIRE_NATS_SERVER) return process.env.SPARSEWIRE_NATS_SERVER;
  for (const dir of (process.env.PATH ?? '').split(path.delimiter)) {
    const p = path.join(dir, 'nats-server');
    if (dir !== '' && existsSync(p)) return p;
  }
  return CANDIDATES.find((p) => existsSync(p));
}

export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.once('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const port = (srv.address() as net.AddressInfo).port;
      srv.close(() => resolve(port));
    });
  });
}

export interface RunningNode {
  id: string;
  url: string;
  child: ChildProcess;
  /** Lines the node wrote on stderr (its JSON logs), for failure messages. */
  stderr: string[];
}

export class ClusterHarness {
  readonly children: ChildProcess[] = [];
  natsUrl = '';
  private storeDir = '';

  async startNats(binary: string): Promise<string> {
    const port = await freePort();
    this.storeDir = mkdtempSync(path.join(os.tmpdir(), 'sparsewire-nats-'));
    const child = spawn(binary, ['-js', '-a', '127.0.0.1', '-p', String(port), '-sd', this.storeDir], { stdio: ['ignore', 'ignore', 'pipe'] });
    this.children.push(child);
    let log = '';
    child.stderr!.on('data', (c: Buffer) => (log += c.toString()));
    await waitUntil(() => /Server is ready/.test(log), 15_000, () => `nats-server did not become ready:\n${log}`);
    this.natsUrl = `nats://127.0.0.1:${port}`;
    return this.natsUrl;
  }

  /** Starts a node and resolves with its address once it prints its listening line. */
  startNode(id: string, extraArgs: string[] = []): Promise<RunningNode> {
    const bin = path.resolve('bin', 'sparsewire.js');
    const args = [bin, 'serve', '--port', '0', '--workers', '1', '--no-static', '--log-level', 'warn', '--cluster', this.natsUrl, '--node-id', id, ...extraArgs];
    const child = spawn(process.execPath, args, { stdio: ['ignore', 'pipe', 'pipe'] });
    this.children.push(child);
    const stderr: string[] = [];
    child.stderr!.on('data', (c: Buffer) => stderr.push(c.toString()));
    return new Promise((resolve, reject) => {
      let out = '';
      const timer = setTimeout(() => reject(new Error(`node ${id} did not start within 30 s:\n${stderr.join('')}`)), 30_000);
      child.stdout!.on('data', (c: Buffer) => {
        out += c.toString();
        const m = /sparsewire listening on (\S+)/.exec(out);
        if (m) {
          clearTimeout(timer);
          resolve({ id, url: m[1]!, child, stderr });
        }
      });
      child.once('exit', (code) => {
        clearTimeout(timer);
        reject(new Error(`node ${id} exited with ${code} before listening:\n${stderr.join('')}`));
      });
    });
  }

  /** SIGKILLs every child still running and removes the JetStream store. */
  async stopAll(): Promise<void> {
    await Promise.all(
      this.children.map(
        (c) =>
          new Promise<void>((resolve) => {
            if (c.exitCode !== null || c.signalCode !== null) return resolve();
            c.once('exit', () => resolve());
            c.kill('SIGKILL');
          }),
      ),
    );
    if (this.storeDir !== '') rmSync(this.storeDir, { recursive: true, force: true });
  }
}

export async function waitUntil(done: () => boolean, timeoutMs: number, explain: () => string): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!done()) {
    if (Date.now() > deadline) throw new Error(explain());
    await new Promise((resolve) => setTimeout(resolve, 25));
  }
}
