import type { ConnectionOptions } from '../clients/connection.js';
import type { BehindPolicy } from '../protocol/index.js';
import { readDaemonCounters } from './daemonCounters.js';
import type { LoadSession } from './loadStep.js';
import { LoadProducers } from './loadProducers.js';
import { ProcessSampler } from './procStats.js';
import type { PreparedScenario } from './scenarios.js';
import { ReferenceSubscriber, SlowSubscriber } from './subscribers.js';

export interface SessionOptions {
  connection: ConnectionOptions;
  streamsPerConnection: number;
  /** Slow subscribers and their when_behind policies. */
  slowPolicies: BehindPolicy[];
  /** Read rate of each slow subscriber. */
  slowBytesPerSecond: number;
  /** The daemon's process id when it runs on this machine (CPU and memory are then measured). */
  daemonPid: number | undefined;
  declareTimeoutMs: number;
}

/** Connects the subscribers (first, so they see every stream declared), then the producers, and declares every stream. */
export async function openSession(prepared: PreparedScenario, options: SessionOptions): Promise<LoadSession> {
  const pattern = `${prepared.prefix}.*`;
  const reference = await ReferenceSubscriber.open(options.connection, pattern);
  const slow: SlowSubscriber[] = [];
  const producers = new LoadProducers(options.connection, prepared.streams, options.streamsPerConnection);
  try {
    for (const policy of options.slowPolicies) slow.push(await SlowSubscriber.open(options.connection, pattern, policy, options.slowBytesPerSecond));
    await producers.connect();
    await producers.declareAll(options.declareTimeoutMs);
  } catch (err) {
    await Promise.allSettled([reference.close(), ...slow.map((x) => x.close()), producers.close()]);
    throw err;
  }
  const daemonSampler = options.daemonPid !== undefined ? new ProcessSampler(options.daemonPid) : undefined;
  daemonSampler?.start();
  const { url, token } = options.connection;
  return {
    prepared,
    producers,
    reference,
    slow,
    daemonSampler,
    readCounters: () => readDaemonCounters(url, token).catch(() => undefined),
  };
}

/** Closes every connection; with `closeStreams`, first ends the streams at the daemon. */
export async function closeSession(s: LoadSession, closeStreams: boolean, timeoutMs: number): Promise<void> {
  s.daemonSampler?.stop();
  try {
    if (closeStreams) await s.producers.closeAll(timeoutMs);
  } finally {
    await Promise.allSettled([s.producers.close(), s.reference.close(), ...s.slow.map((x) => x.close())]);
  }
}
