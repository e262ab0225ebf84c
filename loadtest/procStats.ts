import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';

/**
 * CPU time and resident memory of a local process, read from Linux's /proc (field layout as
 * documented in proc(5): `/proc/<pid>/stat` fields 14–15 are utime and stime in clock ticks;
 * `/proc/<pid>/status` has VmRSS and VmHWM, the current and peak resident set, in kB).
 * Worker threads live in the same process, so their CPU and memory are included.
 */
export interface ProcessSample {
  /** performance.now() when read. */
  at: number;
  /** User + system CPU seconds used so far. */
  cpuSeconds: number;
  rssBytes: number;
  /** Peak resident set so far. */
  peakRssBytes: number;
}

let ticksPerSecond: number | undefined;

/** The kernel's clock-tick rate (USER_HZ), asked of getconf once; 100 where it cannot be asked (proc(5) names 100 as the usual value). */
export function clockTicksPerSecond(): number {
  if (ticksPerSecond === undefined) {
    try {
      const value = Number(execFileSync('getconf', ['CLK_TCK'], { encoding: 'utf8', timeout: 2000 }).trim());
      ticksPerSecond = Number.isInteger(value) && value > 0 ? value : 100;
    } catch {
      ticksPerSecond = 100;
    }
  }
  return ticksPerSecond;
}

/** Whether this system has /proc/<pid> files to read. */
export function canSampleProcesses(): boolean {
  try {
    readFileSync(`/proc/${process.pid}/stat`, 'utf8');
    return true;
  } catch {
    return false;
  }
}

/** Parses the text of /proc/<pid>/stat into CPU seconds. */
export function cpuSecondsFromStat(stat: string, ticks: number): number {
  // The command name (field 2) is in parentheses and may itself hold spaces or ')'.
  const rest = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  // rest[0] is field 3 (state), so fields 14 and 15 are rest[11] and rest[12].
  const utime = Number(rest[11]);
  const stime = Number(rest[12]);
  if (!Number.isFinite(utime) || !Number.isFinite(stime)) throw new Error('unexpected /proc/<pid>/stat layout');
  return (utime + stime) / ticks;
}

/** Reads one `Name:   123 kB` line of /proc/<pid>/status, in bytes. */
export function kilobytesField(status: string, name: string): number {
  const match = new RegExp(`^${name}:\\s+(\\d+)\\s+kB$`, 'm').exec(status);
  if (!match) throw new Error(`no ${name} line in /proc/<pid>/status`);
  return Number(match[1]) * 1024;
}

export function sampleProcess(pid: number): ProcessSample {
  const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
  const status = readFileSync(`/proc/${pid}/status`, 'utf8');
  return {
    at: performance.now(),
    cpuSeconds: cpuSecondsFromStat(stat, clockTicksPerSecond()),
    rssBytes: kilobytesField(status, 'VmRSS'),
    peakRssBytes: kilobytesField(status, 'VmHWM'),
  };
}

/** CPU time of the whole machine so far: busy (not idle, not waiting for I/O) and total, in seconds of one CPU. */
export interface MachineCpu {
  busySeconds: number;
  totalSeconds: number;
}

/**
 * Parses the `cpu` line of /proc/stat (proc(5): user nice system idle iowait irq softirq steal
 * guest guest_nice, in clock ticks summed over every CPU; guest time is already inside user).
 */
export function machineCpuFromStat(stat: string, ticks: number): MachineCpu {
  const line = stat.split('\n').find((l) => l.startsWith('cpu '));
  if (line === undefined) throw new Error('no cpu line in /proc/stat');
  const [user, nice, system, idle, iowait = 0, irq = 0, softirq = 0, steal = 0] = line.trim().split(/\s+/).slice(1).map(Number);
  const busy = user! + nice! + system! + irq + softirq + steal;
  return { busySeconds: busy / ticks, totalSeconds: (busy + idle! + iowait) / ticks };
}

/** The machine's CPU counters now, or undefined where /proc/stat cannot be read. */
export function readMachineCpu(): MachineCpu | undefined {
  try {
    return machineCpuFromStat(readFileSync('/proc/stat', 'utf8'), clockTicksPerSecond());
  } catch {
    return undefined;
  }
}

/** CPU use and memory of a process over a window of time. */
export interface UsageSummary {
  /** CPU time over wall time, in percent of one core (200 = two cores busy). */
  cpuPercent: number;
  /** CPU seconds used over the window. */
  cpuSeconds: number;
  rssMeanMb: number;
  rssMaxMb: number;
  /** The kernel's peak resident set of the process at the end of the window (since it started). */
  peakRssMb: number;
}

const MB = 1024 * 1024;

/** Samples a process a few times a second; `window()` summarises the samples since `mark()`. */
export class ProcessSampler {
  #samples: ProcessSample[] = [];
  #timer: NodeJS.Timeout | undefined;
  #failed = false;

  constructor(
    private readonly pid: number,
    private readonly intervalMs = 250,
  ) {}

  start(): void {
    this.#take();
    this.#timer = setInterval(() => this.#take(), this.intervalMs);
    this.#timer.unref();
  }

  stop(): void {
    if (this.#timer) clearInterval(this.#timer);
    this.#timer = undefined;
  }

  /** Starts a new window (drops older samples). */
  mark(): void {
    this.#samples = [];
    this.#take();
  }

  /** Summary since the last `mark()`, or undefined when the process could not be read. */
  window(): UsageSummary | undefined {
    this.#take();
    const s = this.#samples;
    if (this.#failed || s.length < 2) return undefined;
    const first = s[0]!;
    const last = s[s.length - 1]!;
    const wall = (last.at - first.at) / 1000;
    const cpuSeconds = last.cpuSeconds - first.cpuSeconds;
    return {
      cpuPercent: wall > 0 ? (100 * cpuSeconds) / wall : 0,
      cpuSeconds,
      rssMeanMb: s.reduce((sum, x) => sum + x.rssBytes, 0) / s.length / MB,
      rssMaxMb: Math.max(...s.map((x) => x.rssBytes)) / MB,
      peakRssMb: last.peakRssBytes / MB,
    };
  }

  #take(): void {
    if (this.#failed) return;
    try {
      this.#samples.push(sampleProcess(this.pid));
    } catch {
      this.#failed = true; // the process is gone or /proc is not there: report no figures
    }
  }
}

/**
 * Waits (at most `maxMs`) until the machine's CPUs were less than `limitPercent` busy (% of one
 * core) over a one-second window, i.e. other programs have calmed down while the load is idle.
 * Resolves true when quiet, false at the timeout or where /proc/stat cannot be read.
 */
export async function waitForQuiet(limitPercent: number, maxMs: number): Promise<boolean> {
  const deadline = performance.now() + maxMs;
  for (;;) {
    const before = readMachineCpu();
    const at = performance.now();
    await new Promise((r) => setTimeout(r, 1000));
    const after = readMachineCpu();
    if (!before || !after) return false;
    const busyPercent = (100 * (after.busySeconds - before.busySeconds)) / ((performance.now() - at) / 1000);
    if (busyPercent < limitPercent) return true;
    if (performance.now() > deadline) return false;
  }
}
