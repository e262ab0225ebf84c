import type { AddressInfo } from 'node:net';
import { afterEach, describe, expect, it } from 'vitest';
import { WebSocket, WebSocketServer } from 'ws';
import { decode, encode } from '../../../protocol/codec.js';
import type { DaemonToSubscriber, Message } from '../../../protocol/messages.js';
import { type LinkState, type SocketLike, WatchLink } from '../src/connection.js';

describe('WatchLink against a WebSocket server on loopback', () => {
  const servers: WebSocketServer[] = [];
  const links: WatchLink[] = [];
  afterEach(async () => {
    for (const link of links.splice(0)) link.stop();
    for (const server of servers.splice(0)) await new Promise((r) => server.close(r));
  });

  function until<T>(check: () => T | undefined, what: string): Promise<T> {
    return new Promise((resolve, reject) => {
      const started = Date.now();
      const poll = () => {
        const value = check();
        if (value !== undefined) resolve(value);
        else if (Date.now() - started > 10_000) reject(new Error(`timed out waiting for ${what}`));
        else setTimeout(poll, 5);
      };
      poll();
    });
  }

  it('subscribes on every connect, keeps latest when behind, and comes back after the daemon drops it', async () => {
    const server = new WebSocketServer({ host: '127.0.0.1', port: 0 });
    servers.push(server);
    await new Promise((r) => server.once('listening', r));
    const port = (server.address() as AddressInfo).port;
    const requests: Message[] = [];
    const urls: string[] = [];
    let connections = 0;
    server.on('connection', (socket, request) => {
      connections++;
      urls.push(request.url ?? '');
      socket.on('message', (data) => {
        const message = decode(new Uint8Array(data as Buffer));
        requests.push(message);
        if (message.type !== 'subscribe') return;
        socket.send(encode({ v: 1, type: 'subscribed', ref: message.ref, id: `sub-${connections}`, streams: [] }));
        // The first connection is dropped by the daemon right after subscribing.
        if (connections === 1) setTimeout(() => socket.terminate(), 10);
      });
    });

    const states: LinkState[] = [];
    const received: DaemonToSubscriber[] = [];
    const bad: string[] = [];
    let ref = 0;
    const link = new WatchLink({
      url: `ws://127.0.0.1:${port}/v1/watch?token=t0k`,
      subscription: () => ({ v: 1, type: 'subscribe', ref: `r${++ref}`, streams: '*', want: ['quality'], when_behind: 'keep_latest' }),
      onMessage: (m) => received.push(m),
      onState: (s) => states.push(s),
      onBadMessage: (p) => bad.push(p),
      backoff: { initialMs: 20, maxMs: 100, factor: 2, jitter: 0 },
      openSocket: (url) => new WebSocket(url) as unknown as SocketLike,
    });
    links.push(link);
    link.start();

    await until(() => (received.filter((m) => m.type === 'subscribed').length >= 2 ? true : undefined), 'the second subscription');
    expect(urls).toEqual(['/v1/watch?token=t0k', '/v1/watch?token=t0k']);
    expect(requests.map((r) => r.type)).toEqual(['subscribe', 'subscribe']);
    expect(requests.every((r) => r.type === 'subscribe' && r.when_behind === 'keep_latest')).toBe(true);
    const kinds = states.map((s) => s.kind);
    expect(kinds.slice(0, 5)).toEqual(['connecting', 'live', 'waiting', 'connecting', 'live']);
    // The attempt counter starts over once the daemon accepted the subscription again.
    const waiting = states.find((s) => s.kind === 'waiting');
    expect(waiting).toMatchObject({ kind: 'waiting', attempt: 0 });
    expect(bad).toEqual([]);
  });

  it('counts what it cannot read instead of failing, and backs off while nobody answers', async () => {
    const server = new WebSocketServer({ host: '127.0.0.1', port: 0 });
    servers.push(server);
    await new Promise((r) => server.once('listening', r));
    const port = (server.address() as AddressInfo).port;
    server.on('connection', (socket) => {
      socket.send('a text frame');
      socket.send(Buffer.from([0xc1])); // 0xc1 is never used in MessagePack
      socket.send(encode({ v: 1, type: 'declared', ref: 'x', stream: 's', credits: 1, next_seq: null })); // a producer's message
      setTimeout(() => socket.close(1013, 'try again later'), 10);
    });
    const bad: string[] = [];
    const states: LinkState[] = [];
    const link = new WatchLink({
      url: `ws://127.0.0.1:${port}/v1/watch`,
      subscription: () => ({ v: 1, type: 'subscribe', ref: 'r', streams: '*', want: ['quality'], when_behind: 'keep_latest' }),
      onMessage: () => {},
      onState: (s) => states.push(s),
      onBadMessage: (p) => bad.push(p),
      backoff: { initialMs: 10, maxMs: 40, factor: 2, jitter: 0 },
      openSocket: (url) => new WebSocket(url) as unknown as SocketLike,
      now: () => 0, // so each waiting state's retryAt is its delay
    });
    links.push(link);
    link.start();
    await until(() => (states.filter((s) => s.kind === 'waiting').length >= 4 ? true : undefined), 'four retries');
    expect(bad.slice(0, 3)).toEqual([
      'a text frame (the protocol uses binary MessagePack only)',
      expect.stringMatching(/MessagePack/),
      'unexpected message type declared',
    ]);
    // Never subscribed successfully, so every retry waits longer: 10, 20, 40 ms.
    const waits = states.filter((s): s is Extract<LinkState, { kind: 'waiting' }> => s.kind === 'waiting');
    expect(waits.slice(0, 3).map((s) => s.attempt)).toEqual([0, 1, 2]);
    expect(waits.slice(0, 4).map((s) => s.retryAt)).toEqual([10, 20, 40, 40]);
    expect(waits[0]).toMatchObject({ reason: 'try again later' });
  });
});
