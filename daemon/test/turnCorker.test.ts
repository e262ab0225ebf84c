import net from 'node:net';
import { describe, expect, it } from 'vitest';
import { TurnCorker } from '../turnCorker.js';

// Writes of one event-loop turn must leave a socket together, after the turn, in order.

describe('TurnCorker', () => {
  it('holds a turn of writes on each socket and releases them in one write, in order', async () => {
    const server = net.createServer();
    await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
    const port = (server.address() as net.AddressInfo).port;
    const accepted = new Promise<net.Socket>((resolve) => server.once('connection', resolve));
    const client = net.connect(port, '127.0.0.1');
    await new Promise<void>((resolve) => client.once('connect', resolve));
    const peer = await accepted;
    let received = '';
    peer.on('data', (chunk: Buffer) => (received += chunk.toString()));

    const corker = new TurnCorker();
    let writevCalls = 0;
    const writev = (client as unknown as { _writev: (...a: unknown[]) => void })._writev.bind(client);
    (client as unknown as { _writev: (...a: unknown[]) => void })._writev = (...a: unknown[]) => {
      writevCalls++;
      writev(...a);
    };
    for (const part of ['a', 'b', 'c', 'd']) {
      corker.hold(client);
      client.write(part);
    }
    // Nothing has left during the turn.
    expect(client.writableLength).toBe(4);
    await new Promise((resolve) => setImmediate(resolve));
    expect(client.writableLength).toBe(0);
    // One gathered write carried the four (net uses _writev only for a corked batch).
    expect(writevCalls).toBe(1);
    await new Promise((resolve) => setTimeout(resolve, 50));
    expect(received).toBe('abcd');

    // The next turn is held again: corking is per turn, not once for good.
    corker.hold(client);
    client.write('e');
    expect(client.writableLength).toBe(1);
    await new Promise((resolve) => setImmediate(resolve));
    expect(client.writableLength).toBe(0);
    client.destroy();
    peer.destroy();
    server.close();
  });
});
