/** Synthetic feeds of invented scenarios, for the demo, tests and load tests. */
import { GearboxFeed } from './gearbox.js';
import { RangeFeed } from './range.js';
import type { Feed, FeedKind, FeedOptions } from './synthetic.js';
import { TelemetryFeed } from './telemetry.js';

export { GearboxFeed, type GearboxOptions } from './gearbox.js';
export { RangeFeed, type RangeOptions, type Reflector } from './range.js';
export { TelemetryFeed, type TelemetryOptions } from './telemetry.js';
export { SyntheticFeed, RESIDUAL_ALERT, DEFAULT_BURST_FACTOR, type Feed, type FeedKind, type FeedTruth, type FeedOptions } from './synthetic.js';

export { runFeed, type FeedRunOptions } from './runner.js';

export const FEED_KINDS: readonly FeedKind[] = ['gearbox', 'range', 'telemetry'];

/** A feed of the given scenario with its default sizes. */
export function createFeed(kind: FeedKind, options: FeedOptions = {}): Feed {
  switch (kind) {
    case 'gearbox':
      return new GearboxFeed(options);
    case 'range':
      return new RangeFeed(options);
    case 'telemetry':
      return new TelemetryFeed(options);
  }
}
