import type { Certificate, WarmState } from './types.js';

/**
 * What a method hands back to solve(), which adds the refit, the support, the residual and the
 * warm state (solve.ts). The estimate itself is written into the x the method was given.
 */
export interface MethodOutcome {
  iterations: number;
  certificate: Certificate;
  converged: boolean;
  /** True when x is already the least-squares fit on its own support (refit would change nothing). */
  fitted: boolean;
  /** Named figures for subscribers: the λ or ε used, secondary residuals, stage counts. */
  evidence: Record<string, number>;
  /** The method's own parts of the next warm state (x and support are added by solve()). */
  warm: Pick<WarmState, 'lambda' | 'step' | 'dual' | 'gram'>;
}
