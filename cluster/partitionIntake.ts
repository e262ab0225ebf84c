import type { ConsumerMessages, JsMsg } from '@nats-io/jetstream';
import type { Logger } from 'pino';
import { consumerName, type ClusterNames } from './names.js';
import { freshPartitionConsumer, type NatsHandles } from './natsResources.js';

/** Frames pulled per request: enough to keep a partition busy, few enough to hand over quickly. */
const PULL_BATCH = 64;

/**
 * Takes one owned partition's frames from the log, in log order, one at a time, through its own
 * durable pull consumer (created fresh on acquisition, see freshPartitionConsumer). Messages
 * still buffered when it stops are simply not acknowledged: the next owner gets them.
 */
export class PartitionIntake {
  private messages: ConsumerMessages | undefined;
  private stopped = false;
  private loop: Promise<void> = Promise.resolve();

  constructor(
    readonly partition: number,
    private readonly onFrame: (msg: JsMsg) => Promise<void> | void,
    private readonly log: Logger,
  ) {}

  async start(h: NatsHandles, n: ClusterNames, maxAckPending: number): Promise<void> {
    await freshPartitionConsumer(h, n, this.partition, maxAckPending);
    const consumer = await h.js.consumers.get(n.frameLog, consumerName(this.partition));
    if (this.stopped) return;
    const messages = await consumer.consume({ max_messages: Math.min(PULL_BATCH, maxAckPending) });
    this.messages = messages;
    this.loop = (async () => {
      for await (const msg of messages) {
        if (this.stopped) break;
        try {
          await this.onFrame(msg);
        } catch (err) {
          this.log.error({ partition: this.partition, err: (err as Error).message }, 'failed to take a frame from the log');
        }
      }
    })();
  }

  /** Stops taking frames; resolves once the frame being taken (if any) is handled. */
  async stop(): Promise<void> {
    this.stopped = true;
    this.messages?.stop();
    await this.loop;
  }
}
