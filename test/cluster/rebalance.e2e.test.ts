import { afterAll, describe, expect, it } from 'vitest';
import { Producer } from '../../clients/index.js';
import type { RefusedMessage } from '../../protocol/index.js';
import { TestClient } from '../../daemon/test/helpers.js';
import { dftStream } from '../../daemon/test/synthetic.js';
import { LocalCluster, findNatsServer, waitUntil } from '../../cluster/localCluster.js';
import { covered, expectOnceInOrder } from './exactlyOnce.js';

// Graceful handover (docs/cluster.md "Ownership and failover"): one node owns every partition
// while frames flow; a second node joins mid-run and the first hands half of its partitions
// over — stop pulling, finish what it took, delete the lease — while frames keep coming. Every
// frame must still come out exactly once and in order, and the joined node ends up solving some.

const nats = findNatsServer();
const STREAMS = 6;
const FRAMES = 40;
const JOIN_AT = 10;

describe.skipIf(nats === undefined)('cluster rebalancing (needs nats-server; .ci/run installs it)', () => {
  const cluster = new LocalCluster();
  afterAll(() => cluster.stop(), 20_000);

  it('a node joins mid-run: partitions move over, every frame once and in order', async () => {
    await cluster.startNats(nats!);
    const nodeArgs = ['--workers', '1', '--log-level', 'warn'];
    const first = await cluster.startNode('node-a', nodeArgs);
    const s = dftStream();
    const names = Array.from({ length: STREAMS }, (_, i) => `rb.line-${i}`);
    const producer = new Producer({ url: first.url });
    const refused = new Set<string>();
    producer.on('refused', (m: RefusedMessage) => refused.add(`${m.stream}#${m.seq}`));
    await producer.connect();
    const streams = await Promise.all(names.map((name) => producer.declare({ name, operator: s.operator, solver: { method: 'lasso' }, queue: { capacity: 8, policy: 'refuse_new' } })));
    const watcher = await TestClient.connect(`${first.url.replace(/^http/, 'ws')}/v1/watch`);
    watcher.send({ v: 1, type: 'subscribe', ref: 'w', streams: 'rb.*', want: ['quality'], when_behind: 'drop_with_notice' });
    await watcher.next((m) => m.type === 'subscribed');

    const sends: Promise<void>[] = [];
    let joining: Promise<unknown> = Promise.resolve();
    for (let t = 0; t < FRAMES; t++) {
      if (t === JOIN_AT) joining = cluster.startNode('node-b', nodeArgs);
      streams.forEach((st) => sends.push(st.send(s.measurements(t), { seq: t })));
      await new Promise((r) => setTimeout(r, 50));
    }
    await Promise.all([...sends, joining]);
    const accepted = (name: string) => Array.from({ length: FRAMES }, (_, t) => t).filter((t) => !refused.has(`${name}#${t}`));
    await waitUntil(
      () => names.every((name) => accepted(name).every((t) => covered(watcher, name).has(t))),
      60_000,
      () => `not every accepted frame came out within 60 s: ${names.map((n) => `${n} ${covered(watcher, n).size}/${accepted(n).length}`).join(', ')}\n${first.logTail()}`,
    );
    for (const name of names) expectOnceInOrder(watcher, name, accepted(name));

    // The joined node took its share: once balanced, each node owns some partitions, none twice.
    const second = cluster.nodes.find((n) => n.id === 'node-b')!;
    const owned = async (url: string) => ((await (await fetch(`${url}/v1/streams`)).json()) as { streams: Array<{ name: string; owned_here: boolean }> }).streams.filter((e) => e.owned_here).map((e) => e.name);
    let split: [string[], string[]] = [[], []];
    const deadline = Date.now() + 30_000;
    while (Date.now() < deadline) {
      split = [await owned(first.url), await owned(second.url)];
      if (split[0].length + split[1].length === STREAMS && split[1].length > 0) break;
      await new Promise((r) => setTimeout(r, 250));
    }
    expect(split[1].length, 'the joined node owns some streams').toBeGreaterThan(0);
    expect([...split[0], ...split[1]].sort()).toEqual([...names].sort());
    await producer.close();
    watcher.close();
  }, 150_000);
});
