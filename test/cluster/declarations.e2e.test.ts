import { jetstream } from '@nats-io/jetstream';
import { connect } from '@nats-io/transport-node';
import { pack } from 'msgpackr';
import { afterAll, describe, expect, it } from 'vitest';
import { float64ToBin, type MissedMessage, type ResultMessage } from '../../protocol/index.js';
import { TestClient, declare, frameMessage } from '../../daemon/test/helpers.js';
import { dftStream } from '../../daemon/test/synthetic.js';
import { clusterNames, frameMessageId, frameSubject, partitionOf } from '../../cluster/index.js';
import { LocalCluster, findNatsServer } from '../../cluster/localCluster.js';

// Declarations live in NATS key-value, not in one node (docs/cluster.md "Stream declarations"),
// and a front end may publish frames straight to the documented subjects ("Publishing straight
// to NATS"). A real nats-server with JetStream and two nodes on loopback.

const nats = findNatsServer();
const ws = (url: string, path: string) => `${url.replace(/^http/, 'ws')}${path}`;

describe.skipIf(nats === undefined)('cluster declarations and direct publishing (needs nats-server; .ci/run installs it)', () => {
  const cluster = new LocalCluster();
  afterAll(() => cluster.stop(), 20_000);

  it('a declaration made on one node holds on the other; frames published straight to NATS are solved and watched anywhere', async () => {
    await cluster.startNats(nats!);
    const [a, b] = await Promise.all(['node-a', 'node-b'].map((id) => cluster.startNode(id, ['--workers', '1', '--log-level', 'warn'])));
    const s = dftStream();
    const other = dftStream(256, 48);
    const decl = { name: 'kv.line.1', operator: s.operator, solver: { method: 'lasso' } };

    const watcher = await TestClient.connect(ws(b!.url, '/v1/watch'));
    watcher.send({ v: 1, type: 'subscribe', ref: 'w', streams: 'kv.*', want: ['quality'], when_behind: 'drop_with_notice' });
    await watcher.next((m) => m.type === 'subscribed');

    const pa = await TestClient.connect(ws(a!.url, '/v1/produce'));
    await declare(pa, decl);
    // Node b learns it from the bucket: its subscribers hear of it and its stream list has it.
    await watcher.next((m) => m.type === 'stream_event' && m.stream === 'kv.line.1' && m.event === 'declared');
    const listed = (await (await fetch(`${b!.url}/v1/streams`)).json()) as { streams: Array<{ name: string; rows: number; partition: number }> };
    expect(listed.streams.find((e) => e.name === 'kv.line.1')).toMatchObject({ rows: s.rows, partition: partitionOf('kv.line.1', 32) });

    // The same name with another operator is refused on the other node, as on a single node.
    const pb = await TestClient.connect(ws(b!.url, '/v1/produce'));
    pb.send({ v: 1, type: 'declare', ref: 'x', stream: { ...decl, operator: other.operator } });
    const conflict = await pb.next((m) => m.type === 'error' && 'ref' in m && m.ref === 'x');
    expect(conflict).toMatchObject({ code: 'declaration_conflict' });

    // A front end publishing straight to NATS: the documented subject, message id and payload.
    const nc = await connect({ servers: cluster.natsUrl });
    try {
      const js = jetstream(nc);
      const names = clusterNames('sparsewire', 32);
      for (let seq = 0; seq < 5; seq++) {
        const frame = { v: 1, type: 'frame', stream: 'kv.line.1', seq, time: Date.now(), y: float64ToBin(s.measurements(seq)) };
        const ack = await js.publish(frameSubject(names, 'kv.line.1'), pack(frame), { msgID: frameMessageId('kv.line.1', seq) });
        expect(ack.duplicate).toBe(false);
      }
      // Sent again with the same message id: JetStream stores it once (its duplicate window).
      const again = await js.publish(frameSubject(names, 'kv.line.1'), pack({ v: 1, type: 'frame', stream: 'kv.line.1', seq: 4, time: 0, y: float64ToBin(s.measurements(4)) }), { msgID: frameMessageId('kv.line.1', 4) });
      expect(again.duplicate).toBe(true);
      // A frame on the wrong partition is reported, not solved.
      const wrong = (partitionOf('kv.line.1', 32) + 1) % 32;
      await js.publish(`sparsewire.frames.${wrong}.kv=line=1`, pack({ v: 1, type: 'frame', stream: 'kv.line.1', seq: 5, time: 0, y: float64ToBin(s.measurements(5)) }));
    } finally {
      await nc.close();
    }
    const missed = await watcher.next<MissedMessage>((m) => m.type === 'missed' && m.stream === 'kv.line.1');
    expect(missed).toMatchObject({ from_seq: 5, to_seq: 5, reason: 'invalid_field' });
    // Then WebSocket frames through node a continue the same stream.
    for (let seq = 6; seq < 8; seq++) pa.send(frameMessage('kv.line.1', seq, s.measurements(seq)));
    await watcher.next((m) => m.type === 'result' && m.stream === 'kv.line.1' && m.seq === 7);
    const seqs = watcher.ofType('result').filter((r: ResultMessage) => r.stream === 'kv.line.1').map((r) => r.seq);
    expect(seqs).toEqual([0, 1, 2, 3, 4, 6, 7]);

    // Closing on node a deletes the declaration everywhere.
    pa.send({ v: 1, type: 'close', ref: 'c', stream: 'kv.line.1' });
    await pa.next((m) => m.type === 'closed');
    await watcher.next((m) => m.type === 'stream_event' && m.stream === 'kv.line.1' && m.event === 'closed');
    const after = (await (await fetch(`${b!.url}/v1/streams`)).json()) as { streams: unknown[] };
    expect(after.streams).toEqual([]);
    pa.close();
    pb.close();
    watcher.close();
  }, 90_000);
});
