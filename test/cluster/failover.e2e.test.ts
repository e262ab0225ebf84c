import { afterAll, describe, expect, it } from 'vitest';
import { Producer } from '../../clients/index.js';
import type { RefusedMessage } from '../../protocol/index.js';
import { TestClient } from '../../daemon/test/helpers.js';
import { dftStream } from '../../daemon/test/synthetic.js';
import { covered, expectOnceInOrder } from './exactlyOnce.js';
import { LocalCluster, type LocalNode, findNatsServer, waitUntil } from '../../cluster/localCluster.js';

// The cluster's promise (docs/cluster.md): frames stored in the JetStream log are not lost when
// the node owning their partition dies. A real nats-server with JetStream and three sparsewire
// nodes on loopback; producers (the client library) feed eight streams through one node, a
// subscriber watches from another, and the node owning the most of those streams is SIGKILLed
// mid-run. Every frame the cluster accepted must come out exactly once — as a result or inside
// a `missed` notice — in sequence order per stream, and the moved streams restart cold
// (`cold_start` on their first result after the move, see docs/daemon.md "Quality flags").

const nats = findNatsServer();
const STREAMS = 8;
const FRAMES = 40;
const KILL_AT = 14;

describe.skipIf(nats === undefined)('cluster failover (needs nats-server; .ci/run installs it)', () => {
  const harness = new LocalCluster();
  afterAll(() => harness.stop(), 20_000);

  it('a node dies mid-run: every accepted frame is solved once or reported, in order, seen from a surviving node', async () => {
    await harness.startNats(nats!);
    const nodes = await Promise.all(['node-a', 'node-b', 'node-c'].map((id) => harness.startNode(id, ['--workers', '1', '--log-level', 'warn'])));
    const [gateway] = nodes as [LocalNode, LocalNode, LocalNode];
    const s = dftStream();
    const names = Array.from({ length: STREAMS }, (_, i) => `fo.line-${i}`);

    const producer = new Producer({ url: gateway.url });
    const refused = new Set<string>();
    producer.on('refused', (m: RefusedMessage) => refused.add(`${m.stream}#${m.seq}`));
    await producer.connect();
    const streams = await Promise.all(names.map((name) => producer.declare({ name, operator: s.operator, solver: { method: 'lasso' }, queue: { capacity: 8, policy: 'refuse_new' } })));

    // Wait until ownership has settled: every stream owned by exactly one node, twice in a row.
    const owners = async () => {
      const views = await Promise.all(nodes.map(async (n) => ({ n, list: ((await (await fetch(`${n.url}/v1/streams`)).json()) as { streams: Array<{ name: string; owned_here: boolean }> }).streams })));
      return new Map(names.map((name) => [name, views.filter((v) => v.list.some((e) => e.name === name && e.owned_here)).map((v) => v.n)]));
    };
    let settled = 0;
    let ownership = await owners();
    const deadline = Date.now() + 30_000;
    while (settled < 2) {
      if (Date.now() > deadline) throw new Error('partition ownership did not settle within 30 s');
      await new Promise((r) => setTimeout(r, 500));
      ownership = await owners();
      settled = [...ownership.values()].every((o) => o.length === 1) ? settled + 1 : 0;
    }
    const ownedBy = (n: LocalNode) => names.filter((name) => ownership.get(name)![0] === n);
    const [victim, survivor] = ownedBy(nodes[1]!).length >= ownedBy(nodes[2]!).length ? [nodes[1]!, nodes[2]!] : [nodes[2]!, nodes[1]!];
    const moved = ownedBy(victim);
    expect(moved.length, 'the node to be killed owns some of the streams').toBeGreaterThan(0);

    const watcher = await TestClient.connect(`${survivor.url.replace(/^http/, 'ws')}/v1/watch`);
    watcher.send({ v: 1, type: 'subscribe', ref: 'w', streams: 'fo.*', want: ['quality'], when_behind: 'drop_with_notice' });
    await watcher.next((m) => m.type === 'subscribed');

    const sends: Promise<void>[] = [];
    /** Highest result seq of each moved stream seen before the kill (-1: none yet). */
    const seenAtKill = new Map<string, number>();
    for (let t = 0; t < FRAMES; t++) {
      if (t === KILL_AT) {
        for (const name of moved) seenAtKill.set(name, Math.max(-1, ...watcher.ofType('result').filter((r) => r.stream === name).map((r) => r.seq)));
        victim.child.kill('SIGKILL');
      }
      streams.forEach((st) => sends.push(st.send(s.measurements(t), { seq: t })));
      await new Promise((r) => setTimeout(r, 30));
    }
    await Promise.all(sends);

    const accepted = (name: string) => Array.from({ length: FRAMES }, (_, t) => t).filter((t) => !refused.has(`${name}#${t}`));
    await waitUntil(
      () => names.every((name) => accepted(name).every((t) => covered(watcher, name).has(t))),
      60_000,
      () => `not every accepted frame came out within 60 s: ${names.map((n) => `${n} ${covered(watcher, n).size}/${accepted(n).length}`).join(', ')}\n${victim.id} killed; survivor ${survivor.id} log:\n${survivor.logTail()}`,
    );

    for (const name of names) expectOnceInOrder(watcher, name, accepted(name));
    // The moved streams were solved after the kill by a survivor, starting cold (the dead node
    // may have published a few more results after our snapshot, so: some later result is cold).
    for (const name of moved) {
      const after = watcher.ofType('result').filter((r) => r.stream === name && r.seq > seenAtKill.get(name)!);
      expect(after.length, `${name}: results after the kill`).toBeGreaterThan(0);
      expect(after.some((r) => r.flags.includes('cold_start')), `${name}: restarted cold after the move`).toBe(true);
    }
    // Most frames are solved, not merely reported (reports are for frames the dead node had dropped).
    const solved = watcher.ofType('result').filter((r) => r.stream.startsWith('fo.')).length;
    expect(solved).toBeGreaterThan(0.9 * STREAMS * FRAMES - refused.size);
    await producer.close();
    watcher.close();
  }, 120_000);
});
