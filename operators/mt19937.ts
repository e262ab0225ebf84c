/**
 * MT19937, the 32-bit Mersenne Twister (Matsumoto & Nishimura, ACM TOMACS 8(1), 1998),
 * seeded with `init_genrand` and read as 32-bit words (`genrand_int32`) or as 53-bit
 * doubles in [0, 1) (`genrand_res53`) exactly as the authors' reference mt19937ar.c.
 * Every seeded construction in this folder draws from it so that a front end in another
 * language can rebuild the same operator (see docs/operators.md).
 */
const N = 624;
const M = 397;
const MATRIX_A = 0x9908b0df;
const UPPER_MASK = 0x80000000;
const LOWER_MASK = 0x7fffffff;

export class MT19937 {
  private readonly mt = new Uint32Array(N);
  private index = N;

  /** init_genrand(seed); seed must be an integer in [0, 2^32). */
  constructor(seed: number) {
    if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) {
      throw new RangeError(`MT19937 seed must be an integer in [0, 2^32), got ${seed}`);
    }
    const mt = this.mt;
    mt[0] = seed >>> 0;
    for (let i = 1; i < N; i++) {
      const prev = mt[i - 1]!;
      // 1812433253 · (prev ^ (prev >> 30)) + i, modulo 2^32.
      mt[i] = (Math.imul(1812433253, prev ^ (prev >>> 30)) + i) >>> 0;
    }
  }

  /** genrand_int32: the next 32-bit output as an unsigned integer. */
  nextUint32(): number {
    if (this.index >= N) this.twist();
    let y = this.mt[this.index++]!;
    y ^= y >>> 11;
    y ^= (y << 7) & 0x9d2c5680;
    y ^= (y << 15) & 0xefc60000;
    y ^= y >>> 18;
    return y >>> 0;
  }

  /** genrand_res53: (a·2^26 + b) / 2^53 with a, b the top 27 and 26 bits of two outputs. */
  nextDouble(): number {
    const a = this.nextUint32() >>> 5;
    const b = this.nextUint32() >>> 6;
    return (a * 67108864 + b) / 9007199254740992;
  }

  private twist(): void {
    const mt = this.mt;
    for (let k = 0; k < N; k++) {
      const y = (mt[k]! & UPPER_MASK) | (mt[(k + 1) % N]! & LOWER_MASK);
      mt[k] = mt[(k + M) % N]! ^ (y >>> 1) ^ (y & 1 ? MATRIX_A : 0);
    }
    this.index = 0;
  }
}
