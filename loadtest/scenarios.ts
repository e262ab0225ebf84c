import { GearboxFeed, RangeFeed, TelemetryFeed, type Feed, type FeedKind } from '../clients/feeds/index.js';
import { float64ToBin, type StreamDeclaration } from '../protocol/index.js';

/**
 * The load scenarios: groups of synthetic streams (clients/feeds) with a frame size, a solver, a
 * queue policy and a per-stream rate relative to the other groups of the scenario. A scenario
 * is run at a total offered load in frames per second, split over its streams by those rates.
 */
export interface GroupSpec {
  /** Short name, used in stream names and the report. */
  label: string;
  /** What the streams of this group are, in plain words. */
  description: string;
  count: number;
  /** Per-stream rate relative to the scenario's other groups. */
  relativeRate: number;
  /** A fresh feed for this group (its declaration is shared by all streams of the group). */
  feed: () => Feed;
}

export interface Scenario {
  name: ScenarioName | 'custom';
  summary: string;
  groups: GroupSpec[];
}

export const SCENARIO_NAMES = ['small', 'large-dft', 'large-gabor', 'mixed'] as const;
export type ScenarioName = (typeof SCENARIO_NAMES)[number];

const GROUPS = {
  small: (count: number, relativeRate = 1): GroupSpec => ({
    label: 'small',
    description: 'gearbox vibration, n = 512 DFT bins, m = 96 random time samples, OMP (s = 8), queue 32 drop_oldest',
    count,
    relativeRate,
    feed: () => new GearboxFeed({ n: 512, m: 96 }),
  }),
  dft: (count: number, relativeRate = 1): GroupSpec => ({
    label: 'dft8192',
    description: 'gearbox vibration, n = 8192 DFT bins, m = 512 random time samples (subsampled DFT), OMP (s = 8), queue 32 drop_oldest',
    count,
    relativeRate,
    feed: () => new GearboxFeed({ n: 8192, m: 512 }),
  }),
  gabor: (count: number, relativeRate = 1): GroupSpec => ({
    label: 'gabor128',
    description: 'delay-Doppler range, n = 128 probe, full 128 × 128 Gabor grid (16384 unknowns), OMP (s = 6), queue 16 keep_latest',
    count,
    relativeRate,
    feed: () => new RangeFeed({ n: 128, delays: 128, dopplerFrom: -64, dopplerTo: 63 }),
  }),
  telemetry: (count: number, relativeRate = 1): GroupSpec => ({
    label: 'telemetry',
    description: 'telemetry, 48 Gaussian projections of a 128-sample piecewise-constant signal (Haar), OMP (s = 10), queue 64 refuse_new',
    count,
    relativeRate,
    feed: () => new TelemetryFeed({}),
  }),
};

export interface ScenarioSizes {
  /** Streams of the many-small-streams scenario (default 1000). */
  smallStreams?: number;
}

/** A scenario of one feed kind with chosen sizes: `n` (signal length) and `m` (measurements) where the feed has them. */
export interface CustomScenario {
  feed: FeedKind;
  streams: number;
  n?: number;
  m?: number;
}

/** A feed of the chosen kind and sizes; the range feed gets the full n × n delay-Doppler grid when n is chosen. */
export function customFeed(c: CustomScenario): Feed {
  switch (c.feed) {
    case 'gearbox':
      return new GearboxFeed({ ...(c.n !== undefined ? { n: c.n } : {}), ...(c.m !== undefined ? { m: c.m } : {}) });
    case 'range':
      return new RangeFeed(c.n !== undefined ? { n: c.n, delays: c.n, dopplerFrom: -Math.floor(c.n / 2), dopplerTo: Math.ceil(c.n / 2) - 1 } : {});
    case 'telemetry':
      return new TelemetryFeed({ ...(c.n !== undefined ? { n: c.n } : {}), ...(c.m !== undefined ? { rows: c.m } : {}) });
  }
}

/** The custom scenario; builds one feed to describe it (and to fail early on sizes the feed rejects). */
export function buildCustomScenario(c: CustomScenario): Scenario {
  const sample = customFeed(c);
  const d = sample.declaration;
  const solver = d.solver as { method: string };
  const queue = d.queue ?? { capacity: 32, policy: 'refuse_new' };
  const group: GroupSpec = {
    label: c.feed,
    description: `${c.feed} feed, ${(d.operator as { kind: string }).kind} operator, ${sample.operator.rows} measurements of ${sample.operator.cols} unknowns, ${solver.method}, queue ${queue.capacity} ${queue.policy}`,
    count: c.streams,
    relativeRate: 1,
    feed: () => customFeed(c),
  };
  return { name: 'custom', summary: `${c.streams} streams: ${group.description}`, groups: [group] };
}

export function buildScenario(name: ScenarioName, sizes: ScenarioSizes = {}): Scenario {
  switch (name) {
    case 'small': {
      const n = sizes.smallStreams ?? 1000;
      return { name, summary: `many small streams: ${n} streams of n = 512`, groups: [GROUPS.small(n)] };
    }
    case 'large-dft':
      return { name, summary: 'a few large streams: 4 streams of n = 8192 (subsampled DFT)', groups: [GROUPS.dft(4)] };
    case 'large-gabor':
      return { name, summary: 'a few large streams: 4 streams of n = 128 on the full Gabor grid', groups: [GROUPS.gabor(4)] };
    case 'mixed':
      // Large streams run four times the small streams' rate, telemetry half of it.
      return {
        name,
        summary: 'all kinds at once: 300 small, 100 telemetry, 2 n = 8192 DFT and 2 full-grid Gabor streams',
        groups: [GROUPS.small(300, 1), GROUPS.telemetry(100, 0.5), GROUPS.dft(2, 4), GROUPS.gabor(2, 4)],
      };
  }
}

/** Frames each group cycles through (consecutive frames of one feed, so warm starts stay useful). */
export const RING_FRAMES = 32;

/** One stream of a running scenario. */
export interface LoadStream {
  index: number;
  group: number;
  declaration: StreamDeclaration;
}

/** A group ready to send: its streams' declarations and the frames they cycle through. */
export interface PreparedGroup {
  spec: GroupSpec;
  /** Measurement vectors (interleaved complex) of consecutive frames... */
  frames: Float64Array[];
  /** ...and the same as wire bytes. */
  wireFrames: Uint8Array[];
  /** The feed's declaration (each stream of the group gets its own name). */
  declaration: StreamDeclaration;
}

export interface PreparedScenario {
  scenario: Scenario;
  groups: PreparedGroup[];
  streams: LoadStream[];
  /** Every stream name starts with this (subscribers watch `${prefix}.*`). */
  prefix: string;
}

export function prepareScenario(scenario: Scenario, prefix: string): PreparedScenario {
  const groups: PreparedGroup[] = [];
  const streams: LoadStream[] = [];
  scenario.groups.forEach((spec, g) => {
    const feed = spec.feed();
    const frames = Array.from({ length: RING_FRAMES }, () => feed.next().slice());
    groups.push({ spec, frames, wireFrames: frames.map((y) => float64ToBin(y)), declaration: feed.declaration });
    const width = String(spec.count - 1).length;
    for (let i = 0; i < spec.count; i++) {
      const name = `${prefix}.${spec.label}.${String(i).padStart(width, '0')}`;
      streams.push({ index: streams.length, group: g, declaration: { ...feed.declaration, name } });
    }
  });
  return { scenario, groups, streams, prefix };
}

/** The total load at which a stream of relative rate 1 sends `fps` frames per second. */
export function totalForStreamRate(scenario: Scenario, fps: number): number {
  return fps * scenario.groups.reduce((sum, g) => sum + g.count * g.relativeRate, 0);
}

/** Per-stream rate of each group when the scenario runs at `totalFps` frames per second. */
export function perStreamRates(scenario: Scenario, totalFps: number): number[] {
  const weight = scenario.groups.reduce((sum, g) => sum + g.count * g.relativeRate, 0);
  return scenario.groups.map((g) => (totalFps * g.relativeRate) / weight);
}

/** Each group's share of the frames. */
export function frameShares(scenario: Scenario): number[] {
  const weight = scenario.groups.reduce((sum, g) => sum + g.count * g.relativeRate, 0);
  return scenario.groups.map((g) => (g.count * g.relativeRate) / weight);
}
