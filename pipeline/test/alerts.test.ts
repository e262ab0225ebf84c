import { describe, expect, it } from 'vitest';
import { StreamAlerts, alertValues } from '../alerts.js';
import type { AlertRule, Evidence } from '../types.js';

// Checks against the rule semantics defined in pipeline/alerts.ts (k of the last n frames above
// the limit raises; k of the last n below the clear level clears).
const rule: AlertRule = { metric: 'relative_residual', above: 0.5, clear_below: 0.2, k: 2, of: 3 };

function run(values: number[], rules: AlertRule[] = [rule]) {
  const a = new StreamAlerts('s', rules);
  return values.flatMap((v, seq) =>
    a.observe(seq, { relative_residual: v, certificate: 0, iterations: 0, support_churn: 0, input_gap: 0 }).map((e) => [seq, e.state, e.value, e.limit]),
  );
}

describe('StreamAlerts', () => {
  it('raises on the k-th frame above the limit within the window, not before', () => {
    expect(run([0.6, 0.1, 0.1, 0.6])).toEqual([]); // never 2 highs within 3
    expect(run([0.6, 0.1, 0.7])).toEqual([[2, 'raised', 0.7, 0.5]]);
  });

  it('clears only after k frames below the clear level (hysteresis: in-between values hold it)', () => {
    const events = run([0.9, 0.9, 0.3, 0.3, 0.3, 0.1, 0.3, 0.1]);
    expect(events).toEqual([
      [1, 'raised', 0.9, 0.5],
      [7, 'cleared', 0.1, 0.2],
    ]);
  });

  it('counts a non-finite value as above and never as below', () => {
    expect(run([Number.NaN, Number.POSITIVE_INFINITY])).toEqual([[1, 'raised', Number.POSITIVE_INFINITY, 0.5]]);
  });

  it('tracks several rules independently and reports which are active', () => {
    const iter: AlertRule = { metric: 'iterations', above: 100, clear_below: 10, k: 1, of: 1 };
    const a = new StreamAlerts('s', [rule, iter]);
    const ev = a.observe(0, { relative_residual: 0, certificate: 0, iterations: 500, support_churn: 0, input_gap: 0 });
    expect(ev.map((e) => [e.ruleIndex, e.state])).toEqual([[1, 'raised']]);
    expect(a.activeRules()).toEqual([1]);
  });

  it('derives support churn as a fraction of the support and passes input gaps through', () => {
    const ev: Evidence = {
      relative_residual: 0.01, residual: 0.1, iterations: 12, certificate_kind: 'duality_gap', certificate: 1e-6,
      converged: true, support_size: 8, added: 2, removed: 2, recoverability: 'safe', solve_ms: 1,
    };
    expect(alertValues(ev, 3)).toEqual({ relative_residual: 0.01, certificate: 1e-6, iterations: 12, support_churn: 0.5, input_gap: 3 });
  });
});
