/**
 * How much each quality flag should worry a watcher (flag names are the pipeline's, see
 * pipeline/quality.ts). Flags this page does not know yet count as worth a look.
 */
export type FlagSeverity = 'note' | 'warn' | 'bad';

const SEVERITY: Readonly<Record<string, FlagSeverity>> = {
  cold_start: 'note',
  sequence_gap: 'warn',
  frames_dropped_before: 'warn',
  iteration_cap: 'warn',
  support_churn: 'warn',
  recovery_marginal: 'warn',
  residual_high: 'bad',
  not_converged: 'bad',
  recovery_unlikely: 'bad',
};

export function flagSeverity(flag: string): FlagSeverity {
  return SEVERITY[flag] ?? 'warn';
}

/** Plain-word label for a flag: its name with spaces. */
export function flagLabel(flag: string): string {
  return flag.replaceAll('_', ' ');
}
