import * as crypto from 'node:crypto';
import { describe, expect, it, vi } from 'vitest';
import { AccessControl } from '../../daemon/access.js';
import { recordFigures, SCALE } from './support/scale.js';

// Token comparison under a guessing attack. Oracle: a comparison whose time cannot depend on how
// much of a guess is right compares fixed-length values with a constant-time primitive, over
// every grant, without early exit (Node's crypto.timingSafeEqual is documented as constant time
// for equal-length inputs; comparing SHA-256 digests makes every input the same length). The
// test counts those primitive calls and their argument lengths for guesses that share 0…n
// leading characters with a real token, have other lengths, or are right.

vi.mock('node:crypto', async (importOriginal) => {
  const real = await importOriginal<typeof import('node:crypto')>();
  return { ...real, timingSafeEqual: vi.fn(real.timingSafeEqual) };
});

const GRANTS = [
  { token: 'k7Qw2mZp9xLr4tVb8nHs3cJd6fGy1aEu', roles: ['produce' as const] },
  { token: 'short', roles: ['watch' as const] },
  { token: 'P'.repeat(200), roles: ['admin' as const] },
];

describe('token comparison', () => {
  it('compares equal-length digests with the constant-time primitive against every grant, whatever the guess', () => {
    const access = new AccessControl(GRANTS);
    const spy = vi.mocked(crypto.timingSafeEqual);
    const real = GRANTS[0]!.token;
    const guesses = [
      ...Array.from({ length: real.length + 1 }, (_, n) => real.slice(0, n) + 'x'.repeat(real.length - n)), // 0…32 right leading characters
      real.slice(0, 5),
      real + 'x',
      'x'.repeat(10_000),
      'short',
      'P'.repeat(200),
      real,
      '\u0000',
    ];
    for (const guess of guesses) {
      spy.mockClear();
      const outcome = access.authenticate(guess);
      expect(spy).toHaveBeenCalledTimes(GRANTS.length);
      for (const [a, b] of spy.mock.calls) {
        expect((a as Buffer).length).toBe(32);
        expect((b as Buffer).length).toBe(32);
      }
      expect(outcome.ok).toBe(GRANTS.some((g) => g.token === guess));
    }

    // Measured, not asserted (tests never assert time): mean time of a guess with no right
    // characters against one with all but the last right, for the report.
    const rounds = SCALE === 'ci' ? 2000 : 50_000;
    const time = (guess: string) => {
      const start = process.hrtime.bigint();
      for (let i = 0; i < rounds; i++) access.authenticate(guess);
      return Number(process.hrtime.bigint() - start) / rounds;
    };
    const wrongFirst = 'x'.repeat(real.length);
    const wrongLast = real.slice(0, -1) + 'x';
    time(wrongFirst);
    time(wrongLast);
    const ratios: number[] = [];
    for (let k = 0; k < 11; k++) {
      // Alternate which one goes first, so drift on a shared machine does not favour either.
      if (k % 2 === 0) {
        const last = time(wrongLast);
        ratios.push(last / time(wrongFirst));
      } else {
        const first = time(wrongFirst);
        ratios.push(time(wrongLast) / first);
      }
    }
    ratios.sort((a, b) => a - b);
    recordFigures('access: token guesses', {
      guesses: guesses.length,
      constant_time_calls_per_guess: GRANTS.length,
      compared_bytes: 32,
      time_ratio_last_wrong_over_first_wrong: Math.round(ratios[5]! * 1000) / 1000,
    });
  });
});
