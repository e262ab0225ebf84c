import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterEach, describe, expect, it } from 'vitest';
import { WebSocketServer, type WebSocket } from 'ws';
import { encode, type Message } from '../../protocol/index.js';
import { AccessRefusedError, ReconnectingConnection } from '../connection.js';
import { waitUntil } from './helpers.js';

/**
 * The reconnecting connection against a bare WebSocket server on loopback (the daemon's
 * behaviour is tested end to end elsewhere; here the server misbehaves on purpose).
 */
let server: Server;
let wss: WebSocketServer;
const sockets: WebSocket[] = [];

async function listen(refuseEveryone = false): Promise<string> {
  server = createServer();
  wss = new WebSocketServer({ noServer: true });
  server.on('upgrade', (req, socket, head) => {
    if (refuseEveryone) {
      socket.end('HTTP/1.1 401 Unauthorized\r\nContent-Length: 0\r\n\r\n');
      return;
    }
    wss.handleUpgrade(req, socket, head, (ws) => {
      sockets.push(ws);
      wss.emit('connection', ws, req);
    });
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  return `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
}

afterEach(async () => {
  for (const ws of sockets.splice(0)) ws.terminate();
  wss?.close();
  await new Promise((r) => server?.close(r));
});

describe('reconnecting connection', () => {
  it('skips undecodable messages, reports them, and keeps the connection', async () => {
    const url = await listen();
    const conn = new ReconnectingConnection({ url }, '/v1/watch');
    const garbled: string[] = [];
    const messages: Message[] = [];
    conn.on('garbled', (e) => garbled.push(e.code));
    conn.on('message', (m) => messages.push(m));
    await conn.start();
    await waitUntil(() => sockets.length === 1, 'the server side of the socket');
    sockets[0]!.send(Buffer.from([0xc1])); // not a map
    sockets[0]!.send('text is not allowed');
    sockets[0]!.send(encode({ v: 1, type: 'credit', stream: 'x', grant: 3 }));
    await waitUntil(() => messages.length === 1, 'the valid message');
    expect(garbled).toEqual(['not_a_map', 'malformed']);
    expect(conn.connected).toBe(true);
    await conn.close();
  });

  it('redials after the server drops it, announcing the new socket as a reconnect', async () => {
    const url = await listen();
    const conn = new ReconnectingConnection({ url, backoff: { initialMs: 10, maxMs: 50 } }, '/v1/produce');
    const opens: boolean[] = [];
    const downs: Array<number | null> = [];
    conn.on('open', (again) => opens.push(again));
    conn.on('down', (info) => downs.push(info.retryInMs));
    await conn.start();
    await waitUntil(() => sockets.length === 1, 'first socket');
    sockets[0]!.terminate();
    await waitUntil(() => opens.length === 2, 'the reconnect');
    expect(opens).toEqual([false, true]);
    expect(downs).toHaveLength(1);
    expect(downs[0]).toBeGreaterThan(0);
    await conn.close();
    expect(downs.at(-1)).toBeNull(); // closing on purpose: no retry
  });

  it('gives up at once when access is refused, and when the first dial fails', async () => {
    const url = await listen(true);
    const refused = new ReconnectingConnection({ url, token: 'nope' }, '/v1/watch');
    await expect(refused.start()).rejects.toBeInstanceOf(AccessRefusedError);
    const nobody = new ReconnectingConnection({ url: 'http://127.0.0.1:9' }, '/v1/watch');
    await expect(nobody.start()).rejects.toThrow(/ECONNREFUSED/);
  });
});
