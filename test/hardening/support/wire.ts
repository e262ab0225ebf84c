import net from 'node:net';
import WebSocket from 'ws';
import { decode, type Message } from '../../../protocol/index.js';

/**
 * Raw clients for attack suites: a WebSocket that records whatever comes back (decoding when it
 * can), and a plain TCP request for HTTP-level abuse. Neither follows the protocol's rules.
 */

export class RawSocket {
  readonly received: Message[] = [];
  undecodable = 0;
  closed: { code: number; reason: string } | undefined;
  private readonly watchers: Array<() => void> = [];

  private constructor(readonly ws: WebSocket) {
    ws.on('message', (data: Buffer) => {
      try {
        this.received.push(decode(new Uint8Array(data)));
      } catch {
        this.undecodable++;
      }
      this.wake();
    });
    ws.on('close', (code, reason) => {
      this.closed = { code, reason: reason.toString() };
      this.wake();
    });
    ws.on('error', () => undefined);
  }

  static open(url: string, options: WebSocket.ClientOptions = {}): Promise<RawSocket> {
    return new Promise((resolve, reject) => {
      const ws = new WebSocket(url, { perMessageDeflate: false, ...options });
      const raw = new RawSocket(ws);
      ws.once('open', () => resolve(raw));
      ws.once('unexpected-response', (_req, res) => reject(new Error(`HTTP ${res.statusCode}`)));
      ws.once('error', reject);
    });
  }

  send(data: Uint8Array | string): void {
    this.ws.send(data);
  }

  /** Resolves once `done` holds after some message or close arrived (or rejects after timeoutMs). */
  until(done: () => boolean, what: string, timeoutMs = 20_000): Promise<void> {
    if (done()) return Promise.resolve();
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`timed out waiting for ${what}`)), timeoutMs);
      const check = () => {
        if (!done()) return this.watchers.push(check);
        clearTimeout(timer);
        resolve();
      };
      this.watchers.push(check);
    });
  }

  close(): void {
    this.ws.terminate();
  }

  private wake(): void {
    for (const w of this.watchers.splice(0)) w();
  }
}

/**
 * Writes `request` verbatim to a TCP connection and returns the response's status line, or
 * 'closed' when the server hung up without one, or 'no answer' after `timeoutMs`.
 */
export function rawHttp(port: number, request: string | Uint8Array, timeoutMs = 5000): Promise<string> {
  return new Promise((resolve) => {
    const socket = net.connect(port, '127.0.0.1');
    let text = '';
    const finish = (outcome: string) => {
      clearTimeout(timer);
      socket.destroy();
      resolve(outcome);
    };
    const timer = setTimeout(() => finish('no answer'), timeoutMs);
    socket.on('connect', () => socket.write(request));
    socket.on('data', (chunk) => {
      text += chunk.toString('latin1');
      const end = text.indexOf('\r\n');
      if (end >= 0) finish(text.slice(0, end));
    });
    socket.on('error', () => finish('closed'));
    socket.on('close', () => finish('closed'));
  });
}
