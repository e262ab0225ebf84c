import { spawn, type ChildProcess } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

/**
 * A daemon in a child process (`sparsewire serve`), so its CPU time and memory can be read from
 * /proc apart from the load generator's. Loopback only, an ephemeral port, no persisted state,
 * no dashboard files.
 */
export interface ChildDaemon {
  url: string;
  pid: number;
  /** Stops it (SIGTERM, then SIGKILL if it lingers) and resolves once it has exited. */
  stop(): Promise<void>;
  /** The last lines it wrote to stderr (its log), for error messages. */
  logTail(): string;
  /** Set if it exited while we did not ask it to. */
  readonly exited: { code: number | null; signal: string | null } | null;
}

export interface ChildDaemonOptions {
  workers?: number;
  maxStreamsPerConnection: number;
  /** How long to wait for the listening line. */
  startTimeoutMs?: number;
}

const repoRoot = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const LISTENING = /^sparsewire listening on (\S+)\s*$/m;
const TAIL_BYTES = 4000;

export function serveArguments(options: ChildDaemonOptions): string[] {
  return [
    path.join(repoRoot, 'bin', 'sparsewire.js'),
    'serve',
    '--host', '127.0.0.1',
    '--port', '0',
    '--no-state',
    '--no-static',
    '--log-level', 'error',
    '--max-streams-per-connection', String(options.maxStreamsPerConnection),
    ...(options.workers !== undefined ? ['--workers', String(options.workers)] : []),
  ];
}

export function startChildDaemon(options: ChildDaemonOptions): Promise<ChildDaemon> {
  const child: ChildProcess = spawn(process.execPath, serveArguments(options), {
    cwd: repoRoot,
    stdio: ['ignore', 'pipe', 'pipe'],
    // The child's settings come from its flags alone, not from the caller's SPARSEWIRE_* environment.
    env: Object.fromEntries(Object.entries(process.env).filter(([key]) => !key.startsWith('SPARSEWIRE_'))),
  });
  let stdout = '';
  let stderr = '';
  let announced = false;
  let exited: ChildDaemon['exited'] = null;
  let stopping = false;
  // Never leave a daemon behind: if this process exits first, the child goes with it.
  const killOnExit = () => child.kill('SIGKILL');
  process.once('exit', killOnExit);
  const exit = new Promise<void>((resolve) => {
    child.once('exit', (code, signal) => {
      exited = { code, signal };
      process.off('exit', killOnExit);
      resolve();
    });
  });
  child.stderr!.setEncoding('utf8').on('data', (chunk: string) => {
    stderr = (stderr + chunk).slice(-TAIL_BYTES);
  });
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => {
      child.kill('SIGKILL');
      reject(new Error(`the daemon did not report listening within ${(options.startTimeoutMs ?? 30_000) / 1000} s; its log ends:\n${stderr}`));
    }, options.startTimeoutMs ?? 30_000);
    child.once('error', (err) => {
      clearTimeout(timer);
      reject(new Error(`could not start the daemon: ${err.message}`));
    });
    child.once('exit', (code, signal) => {
      if (stopping || announced) return;
      clearTimeout(timer);
      reject(new Error(`the daemon exited (code ${code}, signal ${signal}) before listening; its log ends:\n${stderr}`));
    });
    child.stdout!.setEncoding('utf8').on('data', (chunk: string) => {
      if (announced) return;
      stdout += chunk;
      const match = LISTENING.exec(stdout);
      if (!match) return;
      announced = true;
      clearTimeout(timer);
      resolve({
        url: match[1]!,
        pid: child.pid!,
        get exited() {
          return stopping ? null : exited;
        },
        logTail: () => stderr,
        stop: async () => {
          stopping = true;
          if (exited) return;
          child.kill('SIGTERM');
          const killer = setTimeout(() => child.kill('SIGKILL'), 15_000);
          await exit;
          clearTimeout(killer);
        },
      });
    });
  });
}
