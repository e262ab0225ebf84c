import type { UnitaryBasis } from '../types.js';
import { copyPrefix } from '../vec.js';

/** Ψ = I: the signal itself is sparse. */
export class IdentityBasis implements UnitaryBasis {
  readonly real = true;
  constructor(readonly size: number) {}
  synthesize(c: Float64Array, out: Float64Array): void {
    copyPrefix(c, out, 2 * this.size);
  }
  analyze(x: Float64Array, out: Float64Array): void {
    copyPrefix(x, out, 2 * this.size);
  }
}
