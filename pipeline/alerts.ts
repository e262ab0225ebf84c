import type { AlertEvent, AlertMetric, AlertRule, Evidence } from './types.js';

/**
 * Alert rules of one stream, evaluated on every published result.
 *
 * Each rule keeps a window of its last `of` frames. While the rule is quiet it is raised when at
 * least `k` frames of the window are strictly above `above`; while raised it is cleared when at
 * least `k` frames of the window are strictly below `clear_below`. The gap between the two levels
 * (hysteresis) keeps a value hovering at the limit from raising and clearing on alternate frames.
 * A value that is not a finite number (a solver that diverged) counts as above and never as below.
 */

/** The per-frame values rules look at. */
export type AlertValues = Record<AlertMetric, number>;

export function alertValues(evidence: Evidence, inputGap: number): AlertValues {
  return {
    relative_residual: evidence.relative_residual,
    certificate: evidence.certificate,
    iterations: evidence.iterations,
    // Support churn as a fraction: coefficients that entered or left, over the support size.
    support_churn: (evidence.added + evidence.removed) / Math.max(1, evidence.support_size),
    input_gap: inputGap,
  };
}

class RuleWindow {
  private readonly above: Uint8Array;
  private readonly below: Uint8Array;
  private next = 0;
  private filled = 0;
  private countAbove = 0;
  private countBelow = 0;
  active = false;

  constructor(readonly rule: AlertRule) {
    this.above = new Uint8Array(rule.of);
    this.below = new Uint8Array(rule.of);
  }

  /** Push one value; returns the new state when it changed. */
  observe(value: number): 'raised' | 'cleared' | undefined {
    const isAbove = !(value <= this.rule.above) ? 1 : 0; // NaN counts as above
    const isBelow = value < this.rule.clear_below ? 1 : 0;
    if (this.filled === this.rule.of) {
      this.countAbove -= this.above[this.next]!;
      this.countBelow -= this.below[this.next]!;
    } else {
      this.filled++;
    }
    this.above[this.next] = isAbove;
    this.below[this.next] = isBelow;
    this.countAbove += isAbove;
    this.countBelow += isBelow;
    this.next = (this.next + 1) % this.rule.of;

    if (!this.active && this.countAbove >= this.rule.k) {
      this.active = true;
      return 'raised';
    }
    if (this.active && this.countBelow >= this.rule.k) {
      this.active = false;
      return 'cleared';
    }
    return undefined;
  }
}

export class StreamAlerts {
  private readonly windows: RuleWindow[];

  constructor(
    private readonly stream: string,
    rules: AlertRule[],
  ) {
    this.windows = rules.map((r) => new RuleWindow(r));
  }

  observe(seq: number, values: AlertValues): AlertEvent[] {
    const events: AlertEvent[] = [];
    this.windows.forEach((w, ruleIndex) => {
      const value = values[w.rule.metric];
      const change = w.observe(value);
      if (change === undefined) return;
      events.push({
        stream: this.stream,
        seq,
        ruleIndex,
        rule: w.rule,
        state: change,
        value,
        limit: change === 'raised' ? w.rule.above : w.rule.clear_below,
      });
    });
    return events;
  }

  /** Rules currently raised, by index. */
  activeRules(): number[] {
    return this.windows.flatMap((w, i) => (w.active ? [i] : []));
  }
}
