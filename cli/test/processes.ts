import { spawn, type ChildProcess } from 'node:child_process';
import { fileURLToPath } from 'node:url';

/** Runs `node bin/sparsewire.js …` as a separate process, as a user would. */

const BIN = fileURLToPath(new URL('../../bin/sparsewire.js', import.meta.url));
const ROOT = fileURLToPath(new URL('../..', import.meta.url));

export interface Finished {
  code: number | null;
  stdout: string;
  stderr: string;
}

export class CliProcess {
  readonly child: ChildProcess;
  stdout = '';
  stderr = '';
  readonly finished: Promise<Finished>;

  constructor(args: string[], env: NodeJS.ProcessEnv = {}) {
    this.child = spawn(process.execPath, [BIN, ...args], {
      cwd: ROOT,
      env: { ...process.env, SPARSEWIRE_DAEMON: '', SPARSEWIRE_TOKEN: '', ...env },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    this.child.stdout!.on('data', (d: Buffer) => (this.stdout += d.toString()));
    this.child.stderr!.on('data', (d: Buffer) => (this.stderr += d.toString()));
    this.finished = new Promise((resolve) => {
      this.child.on('close', (code) => resolve({ code, stdout: this.stdout, stderr: this.stderr }));
    });
  }

  /** Resolves with the first match of `pattern` in stdout (or stderr with `fromStderr`). */
  waitFor(pattern: RegExp, timeoutMs = 30_000, fromStderr = false): Promise<RegExpMatchArray> {
    const deadline = Date.now() + timeoutMs;
    return new Promise((resolve, reject) => {
      const check = () => {
        const match = (fromStderr ? this.stderr : this.stdout).match(pattern);
        if (match) return resolve(match);
        if (this.child.exitCode !== null || Date.now() > deadline) {
          return reject(new Error(`no ${pattern} in output (exit ${this.child.exitCode})\nstdout:\n${this.stdout}\nstderr:\n${this.stderr}`));
        }
        setTimeout(check, 25);
      };
      check();
    });
  }

  /** Sends a signal to this process only (by its id). */
  signal(name: NodeJS.Signals = 'SIGINT'): void {
    if (this.child.exitCode === null && this.child.pid !== undefined) process.kill(this.child.pid, name);
  }
}

/** Runs a command to completion, killing it after `timeoutMs`. */
export async function runCli(args: string[], timeoutMs = 60_000, env: NodeJS.ProcessEnv = {}): Promise<Finished> {
  const p = new CliProcess(args, env);
  const timer = setTimeout(() => p.signal('SIGKILL'), timeoutMs);
  const result = await p.finished;
  clearTimeout(timer);
  return result;
}
