import { appendFileSync } from 'node:fs';

/**
 * How hard the hardening suites push. `ci` is what `npm test` runs (bounded, well under two
 * minutes on two cores); `report` is what `npm run harden` runs for docs/reliability.md; `soak`
 * is the long run (`npm run soak`). Every count below is picked per scale with `byScale`; nothing
 * depends on wall-clock time except the soak's own duration settings.
 */
export type Scale = 'ci' | 'report' | 'soak';

const SCALES: readonly Scale[] = ['ci', 'report', 'soak'];

function scaleFromEnv(): Scale {
  const raw = process.env.SPARSEWIRE_HARDEN_SCALE ?? 'ci';
  if (!(SCALES as readonly string[]).includes(raw)) throw new Error(`SPARSEWIRE_HARDEN_SCALE must be one of ${SCALES.join(', ')}, got "${raw}"`);
  return raw as Scale;
}

export const SCALE: Scale = scaleFromEnv();

/** The value for the current scale. */
export function byScale<T>(values: Record<Scale, T>): T {
  return values[SCALE];
}

/**
 * One fixed seed for every property (override with SPARSEWIRE_HARDEN_SEED to explore further).
 * fast-check prints the seed and the shrunk counterexample's path when a property fails, so a
 * failure is replayed with that seed.
 */
export const FUZZ_SEED = Number(process.env.SPARSEWIRE_HARDEN_SEED ?? 0x5eed_2024);

/** fast-check parameters: fixed seed, a run count per scale, no time limit (counts bound it). */
export function fuzzRuns(runs: Record<Scale, number>): { seed: number; numRuns: number } {
  return { seed: FUZZ_SEED, numRuns: byScale(runs) };
}

export type Figures = Record<string, number | string | boolean>;

/**
 * Records what one attack or fault did, for the reliability report. `npm run harden` sets
 * SPARSEWIRE_HARDEN_FIGURES to a file and renders the collected lines; in plain `npm test` the
 * figures are only asserted, not kept.
 */
export function recordFigures(attack: string, figures: Figures): void {
  const file = process.env.SPARSEWIRE_HARDEN_FIGURES;
  if (!file) return;
  appendFileSync(file, `${JSON.stringify({ attack, scale: SCALE, seed: FUZZ_SEED, figures })}\n`);
}
