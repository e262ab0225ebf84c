import type { KV } from '@nats-io/kv';
import type { StreamDeclaration, StreamShape } from '../pipeline/types.js';
import { identityOf } from '../daemon/core.js';
import { nameToken, streamOfToken } from './names.js';

/** Longest wait for the bucket's current content at start-up. */
const CATCH_UP_LIMIT_MS = 2000;

/** What the declarations bucket holds per stream (JSON). */
export interface DeclarationRecord {
  declaration: StreamDeclaration;
  /** The operator's shape, measured once by the declaring node, so gateways check frame lengths. */
  shape: StreamShape;
}

export interface RegistryEvents {
  declared(record: DeclarationRecord): void;
  closed(stream: string): void;
}

/**
 * The cluster's stream declarations, kept in a KV bucket (key: the stream's name token) and
 * mirrored in memory on every node by a watch. Creating a key is the declaration (the first
 * node to create it wins; a later identical declaration re-attaches), deleting it closes the stream.
 */
export class DeclarationRegistry {
  private readonly records = new Map<string, DeclarationRecord & { identity: string }>();
  private watching: { stop(): void } | undefined;

  constructor(
    private readonly kv: KV,
    private readonly events: RegistryEvents,
    private readonly onBadRecord: (key: string, err: Error) => void,
  ) {}

  /** Starts mirroring; resolves once the bucket's current content is known. */
  async start(): Promise<void> {
    const iter = await this.kv.watch();
    this.watching = iter;
    let caughtUp!: () => void;
    const ready = new Promise<void>((resolve) => (caughtUp = resolve));
    // An empty bucket has nothing to replay: the watcher reports no entries at all.
    if ((await this.kv.status()).values === 0) caughtUp();
    // Bounded either way: a replay made only of delete markers may end without a last entry.
    const fallback = setTimeout(caughtUp, CATCH_UP_LIMIT_MS);
    void (async () => {
      for await (const e of iter) {
        const stream = streamOfToken(e.key);
        if (e.operation === 'PUT') {
          try {
            const record = e.json<DeclarationRecord>();
            const isNew = !this.records.has(stream);
            this.records.set(stream, { ...record, identity: identityOf(record.declaration) });
            if (isNew) this.events.declared(record);
          } catch (err) {
            this.onBadRecord(e.key, err as Error);
          }
        } else if (this.records.delete(stream)) {
          this.events.closed(stream);
        }
        if (e.delta === 0) caughtUp();
      }
    })();
    await ready;
    clearTimeout(fallback);
  }

  stop(): void {
    this.watching?.stop();
  }

  get(stream: string): (DeclarationRecord & { identity: string }) | undefined {
    return this.records.get(stream);
  }

  all(): DeclarationRecord[] {
    return [...this.records.values()];
  }

  /** The record straight from the bucket (when the watch has not shown it yet). */
  async fetch(stream: string): Promise<DeclarationRecord | undefined> {
    const e = await this.kv.get(nameToken(stream));
    if (e === null || e.operation !== 'PUT') return undefined;
    return e.json<DeclarationRecord>();
  }

  /** Creates the declaration; false when the stream is declared already (compare with fetch). */
  async create(record: DeclarationRecord): Promise<boolean> {
    try {
      await this.kv.create(nameToken(record.declaration.name), JSON.stringify(record));
      return true;
    } catch {
      return (await this.fetch(record.declaration.name)) === undefined ? Promise.reject(new Error('the declarations bucket refused the stream')) : false;
    }
  }

  async remove(stream: string): Promise<void> {
    await this.kv.delete(nameToken(stream));
  }
}
