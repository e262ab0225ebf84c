import { type ChildProcess, spawn } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * A whole cluster on this machine, as child processes: a nats-server with JetStream on a
 * loopback port (store in a fresh temp directory) and sparsewire nodes
 * (`bin/sparsewire.js serve --cluster ...`). For the failover test and `sparsewire load --nodes`;
 * `stop` kills everything it started and removes the store.
 */

const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const KNOWN_PLACES = ['/usr/sbin/nats-server', '/usr/bin/nats-server', '/usr/local/bin/nats-server'];
const LISTENING = /sparsewire listening on (\S+)/;
const TAIL_CHARS = 4000;

/** Path of the nats-server binary (SPARSEWIRE_NATS_SERVER, PATH, usual places), or undefined. */
export function findNatsServer(): string | undefined {
  if (process.env.SPARSEWIRE_NATS_SERVER) return process.env.SPARSEWIRE_NATS_SERVER;
  for (const dir of (process.env.PATH ?? '').split(path.delimiter)) {
    if (dir !== '' && existsSync(path.join(dir, 'nats-server'))) return path.join(dir, 'nats-server');
  }
  return KNOWN_PLACES.find((p) => existsSync(p));
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

export interface LocalNode {
  id: string;
  url: string;
  pid: number;
  child: ChildProcess;
  /** The end of what it wrote on stderr (its JSON log). */
  logTail(): string;
}

export class LocalCluster {
  readonly nodes: LocalNode[] = [];
  natsUrl = '';
  private readonly children: ChildProcess[] = [];
  private storeDir = '';

  /** Starts nats-server with JetStream; resolves with its URL once it is ready. */
  async startNats(binary = findNatsServer()): Promise<string> {
    if (binary === undefined) throw new Error('nats-server is not installed (Debian: apt-get install nats-server)');
    const port = await freePort();
    this.storeDir = mkdtempSync(path.join(os.tmpdir(), 'sparsewire-nats-'));
    const child = this.spawn(binary, ['-js', '-a', '127.0.0.1', '-p', String(port), '-sd', this.storeDir], ['ignore', 'ignore', 'pipe']);
    let log = '';
    child.stderr!.on('data', (c: Buffer) => (log = (log + c.toString()).slice(-TAIL_CHARS)));
    await waitUntil(() => /Server is ready/.test(log) || child.exitCode !== null, 15_000, () => `nats-server did not become ready within 15 s:\n${log}`);
    if (child.exitCode !== null) throw new Error(`nats-server exited with ${child.exitCode}:\n${log}`);
    this.natsUrl = `nats://127.0.0.1:${port}`;
    return this.natsUrl;
  }

  /** Starts a node; resolves once it prints its listening line (it has joined the cluster then). */
  startNode(id: string, extraArgs: string[] = []): Promise<LocalNode> {
    const args = [path.join(repoRoot, 'bin', 'sparsewire.js'), 'serve', '--host', '127.0.0.1', '--port', '0', '--no-static', '--cluster', this.natsUrl, '--node-id', id, ...extraArgs];
    const child = this.spawn(process.execPath, args, ['ignore', 'pipe', 'pipe']);
    let stderr = '';
    child.stderr!.on('data', (c: Buffer) => (stderr = (stderr + c.toString()).slice(-TAIL_CHARS)));
    return new Promise((resolve, reject) => {
      let out = '';
      const timer = setTimeout(() => reject(new Error(`node ${id} did not start within 60 s:\n${stderr}`)), 60_000);
      child.stdout!.on('data', (c: Buffer) => {
        out += c.toString();
        const m = LISTENING.exec(out);
        if (!m) return;
        clearTimeout(timer);
        const node: LocalNode = { id, url: m[1]!, pid: child.pid!, child, logTail: () => stderr };
        this.nodes.push(node);
        resolve(node);
      });
      child.once('exit', (code) => {
        clearTimeout(timer);
        reject(new Error(`node ${id} exited with ${code} before listening:\n${stderr}`));
      });
    });
  }

  /** SIGKILLs every process still running and removes the JetStream store. */
  async stop(): Promise<void> {
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

  private spawn(command: string, args: string[], stdio: Array<'ignore' | 'pipe'>): ChildProcess {
    const child = spawn(command, args, {
      cwd: repoRoot,
      stdio: stdio as ['ignore', 'pipe', 'pipe'],
      // Settings come from the flags alone, not from the caller's SPARSEWIRE_* environment.
      env: Object.fromEntries(Object.entries(process.env).filter(([key]) => !key.startsWith('SPARSEWIRE_'))),
    });
    this.children.push(child);
    // Never leave a process behind if this one exits first.
    const killOnExit = () => child.kill('SIGKILL');
    process.once('exit', killOnExit);
    child.once('exit', () => process.off('exit', killOnExit));
    return child;
  }
}

/** nats-server and `count` nodes, started together; on any failure everything started is stopped. */
export async function startLocalCluster(count: number, nodeArgs: string[] = []): Promise<LocalCluster> {
  const cluster = new LocalCluster();
  try {
    await cluster.startNats();
    await Promise.all(Array.from({ length: count }, (_, i) => cluster.startNode(`node-${i + 1}`, nodeArgs)));
    cluster.nodes.sort((a, b) => a.id.localeCompare(b.id));
    return cluster;
  } catch (err) {
    await cluster.stop();
    throw err;
  }
}

export async function waitUntil(done: () => boolean, timeoutMs: number, explain: () => string): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!done()) {
    if (Date.now() > deadline) throw new Error(explain());
    await new Promise((resolve) => setTimeout(resolve, 25));
  }
}
