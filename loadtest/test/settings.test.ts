import { describe, expect, it } from 'vitest';
import { parseCommandLine, UsageError } from '../../cli/args.js';
import { loadSettings, loadSpec } from '../../cli/load.js';
import { buildCustomScenario, customFeed, totalForStreamRate } from '../scenarios.js';

const settingsOf = (argv: string[]) => {
  const parsed = parseCommandLine(loadSpec, argv, {});
  if (parsed.help) throw new Error('unexpected help');
  return loadSettings(parsed.values, () => undefined);
};

describe('sparsewire load settings', () => {
  it('--quick is the small scenario with short steps and a budget under two minutes', () => {
    const { settings, json } = settingsOf(['--quick', '--json']);
    expect(json).toBe(true);
    expect(settings.scenarios).toEqual(['small']);
    expect(settings.smallStreams).toBe(1000);
    expect(settings.search.stepSeconds).toBe(3);
    expect(settings.deadlineSeconds).toBeLessThan(120);
    expect(settings.fixedRates).toBeNull();
  });

  it('the full run has every scenario and a bounded budget', () => {
    const { settings } = settingsOf([]);
    expect(settings.scenarios).toEqual(['small', 'large-dft', 'large-gabor', 'mixed']);
    expect(settings.deadlineSeconds).toBeLessThanOrEqual(900);
  });

  it('--feed with sizes runs a custom scenario; stream rates are kept per stream', () => {
    const { settings } = settingsOf(['--feed', 'range', '--n', '32', '--streams', '5', '--stream-rate', '2', '--stream-rate', '4']);
    expect(settings.scenarios).toEqual(['custom']);
    expect(settings.custom).toEqual({ feed: 'range', streams: 5, n: 32 });
    expect(settings.fixedRates).toEqual({ values: [2, 4], perStream: true });
  });

  it('names the option in every usage error', () => {
    expect(() => settingsOf(['--rate', 'fast'])).toThrow(UsageError);
    expect(() => settingsOf(['--rate', 'fast'])).toThrow(/--rate/);
    expect(() => settingsOf(['--rate', '10', '--stream-rate', '1'])).toThrow(/--rate or --stream-rate/);
    expect(() => settingsOf(['--n', '64'])).toThrow(/--n goes with --feed/);
    expect(() => settingsOf(['--target-pid', '12'])).toThrow(/--target-pid goes with --target/);
    expect(() => settingsOf(['--target', 'not a url'])).toThrow(/--target/);
    expect(() => settingsOf(['--scenario', 'huge'])).toThrow(/--scenario must be one of/);
  });
});

describe('custom scenarios', () => {
  it('build operators of the chosen sizes', () => {
    // Shapes by definition: m time samples of n bins; the full delay-Doppler grid has n · n columns;
    // m projections of an n-sample signal.
    const gear = customFeed({ feed: 'gearbox', streams: 1, n: 1024, m: 64 }).operator;
    expect([gear.rows, gear.cols]).toEqual([64, 1024]);
    const range = customFeed({ feed: 'range', streams: 1, n: 16 }).operator;
    expect([range.rows, range.cols]).toEqual([16, 256]);
    const tele = customFeed({ feed: 'telemetry', streams: 1, n: 64, m: 24 }).operator;
    expect([tele.rows, tele.cols]).toEqual([24, 64]);
  });

  it('describe themselves and turn a per-stream rate into the total load', () => {
    const scenario = buildCustomScenario({ feed: 'gearbox', streams: 7, n: 256, m: 48 });
    expect(scenario.summary).toContain('48 measurements of 256 unknowns');
    expect(totalForStreamRate(scenario, 3)).toBe(21);
  });
});
