import { spawn, type ChildProcess } from 'node:child_process';
import { readFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import type { DaemonConfig } from '../../../daemon/index.js';

/**
 * Parent side of the daemon fixture (daemonFixture.ts) and of `sparsewire serve`: a daemon in a
 * child process, whose crashes show as exits, whose memory is read from outside, and whose log
 * output is captured for inspection.
 */

export const REPO_ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../..');
const FIXTURE = path.join(path.dirname(fileURLToPath(import.meta.url)), 'daemonFixture.ts');

export interface MemorySample {
  rss: number;
  heapUsed: number;
  external: number;
  arrayBuffers: number;
  gcForced: boolean;
}

export interface Exit {
  code: number | null;
  signal: NodeJS.Signals | null;
}

/** What the child printed: the URL line on stdout, logs on stderr. */
export class DaemonProcess {
  private stdoutText = '';
  private stderrText = '';
  private nextId = 1;
  private readonly pending = new Map<number, { resolve: (v: unknown) => void; reject: (e: Error) => void }>();
  readonly exited: Promise<Exit>;
  exit: Exit | undefined;

  private constructor(
    readonly child: ChildProcess,
    readonly url: string,
  ) {
    this.exited = new Promise((resolve) =>
      child.once('exit', (code, signal) => {
        this.exit = { code, signal };
        for (const p of this.pending.values()) p.reject(new Error('the daemon process exited'));
        resolve(this.exit);
      }),
    );
    child.on('message', (m: { id: number; ok: boolean; value?: unknown; error?: string }) => {
      const p = this.pending.get(m.id);
      if (!p) return;
      this.pending.delete(m.id);
      if (m.ok) p.resolve(m.value);
      else p.reject(new Error(m.error));
    });
  }

  /** The fixture: `startDaemon(config)` in a child with --expose-gc and an IPC channel. */
  static fixture(config: Partial<DaemonConfig>): Promise<DaemonProcess> {
    const child = spawn(process.execPath, ['--expose-gc', '--import', 'tsx', FIXTURE], {
      cwd: REPO_ROOT,
      env: { ...process.env, SPARSEWIRE_FIXTURE_CONFIG: JSON.stringify({ host: '127.0.0.1', port: 0, stateDir: null, staticDir: null, ...config }) },
      stdio: ['ignore', 'pipe', 'pipe', 'ipc'],
    });
    return DaemonProcess.attach(child, /^listening (\S+)$/m);
  }

  /** `sparsewire serve` with these arguments (the real command line, as an operator runs it). */
  static serve(args: string[], env: NodeJS.ProcessEnv = {}): Promise<DaemonProcess> {
    const child = spawn(process.execPath, [path.join(REPO_ROOT, 'bin', 'sparsewire.js'), 'serve', ...args], {
      cwd: REPO_ROOT,
      env: { ...process.env, ...env },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    return DaemonProcess.attach(child, /^sparsewire listening on (\S+)$/m);
  }

  private static attach(child: ChildProcess, ready: RegExp): Promise<DaemonProcess> {
    return new Promise((resolve, reject) => {
      let out = '';
      let err = '';
      const onOut = (chunk: Buffer) => {
        out += chunk.toString();
        const m = ready.exec(out);
        if (!m) return;
        child.stdout!.off('data', onOut);
        const daemon = new DaemonProcess(child, m[1]!);
        daemon.stdoutText = out;
        daemon.stderrText = err;
        child.stdout!.on('data', (c: Buffer) => (daemon.stdoutText += c.toString()));
        child.stderr!.off('data', onErr);
        child.stderr!.on('data', (c: Buffer) => (daemon.stderrText += c.toString()));
        resolve(daemon);
      };
      const onErr = (chunk: Buffer) => (err += chunk.toString());
      child.stdout!.on('data', onOut);
      child.stderr!.on('data', onErr);
      child.once('exit', (code, signal) => reject(new Error(`the daemon exited before listening (code ${code}, signal ${signal}):\n${err}`)));
    });
  }

  get pid(): number {
    return this.child.pid!;
  }

  get port(): number {
    return Number(new URL(this.url).port);
  }

  /** Everything the process wrote to stdout and stderr so far. */
  output(): string {
    return this.stdoutText + this.stderrText;
  }

  /** Asks the fixture (not available for `serve`). */
  request<T>(cmd: string, args: Record<string, unknown> = {}): Promise<T> {
    const id = this.nextId++;
    return new Promise<T>((resolve, reject) => {
      this.pending.set(id, { resolve: resolve as (v: unknown) => void, reject });
      this.child.send({ id, cmd, ...args });
    });
  }

  /** Memory after forced garbage collection, from inside the process. */
  memory(): Promise<MemorySample> {
    return this.request<MemorySample>('memory');
  }

  /** Resident set size read from /proc (Linux), without disturbing the process. */
  rssBytes(): number {
    const status = readFileSync(`/proc/${this.pid}/status`, 'utf8');
    const m = /^VmRSS:\s+(\d+) kB$/m.exec(status);
    if (!m) throw new Error('no VmRSS in /proc status');
    return Number(m[1]) * 1024;
  }

  get alive(): boolean {
    return this.exit === undefined;
  }

  kill(signal: NodeJS.Signals): void {
    this.child.kill(signal);
  }

  /** Graceful stop (SIGTERM); SIGKILL if it has not exited within `graceMs`. */
  async stop(graceMs = 15_000): Promise<Exit> {
    if (this.exit) return this.exit;
    this.kill('SIGTERM');
    const timer = setTimeout(() => this.kill('SIGKILL'), graceMs);
    const exit = await this.exited;
    clearTimeout(timer);
    return exit;
  }
}

export const MiB = 1024 * 1024;

export function mib(bytes: number): number {
  return Math.round((bytes / MiB) * 10) / 10;
}
