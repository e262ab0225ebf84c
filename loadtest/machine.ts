import os from 'node:os';

/** The machine a run was measured on, as Node's os module describes it. */
export interface MachineDescription {
  cpu_model: string;
  logical_cpus: number;
  available_parallelism: number;
  memory_gib: number;
  os: string;
  arch: string;
  node: string;
  /** 1-, 5- and 15-minute load averages when the run started and when it ended. */
  load_average_start: number[];
  load_average_end: number[] | null;
}

export function describeMachine(): MachineDescription {
  const cpus = os.cpus();
  return {
    cpu_model: cpus[0]?.model.trim() ?? 'unknown',
    logical_cpus: cpus.length,
    available_parallelism: os.availableParallelism(),
    memory_gib: Math.round((os.totalmem() / 2 ** 30) * 10) / 10,
    os: `${os.type()} ${os.release()}`,
    arch: os.arch(),
    node: process.version,
    load_average_start: os.loadavg().map((x) => Math.round(x * 100) / 100),
    load_average_end: null,
  };
}

export function finishMachine(m: MachineDescription): MachineDescription {
  return { ...m, load_average_end: os.loadavg().map((x) => Math.round(x * 100) / 100) };
}
