import pino from 'pino';
import WebSocket from 'ws';
import {
  binToFloat64,
  decode,
  encode,
  float64ToBin,
  sparseFromWire,
  type Message,
  type ResultMessage,
  type StreamDeclaration,
} from '../../protocol/index.js';
import { type DaemonConfig, type RunningDaemon, startDaemon } from '../index.js';

/** Shared plumbing of the daemon's end-to-end tests: a real daemon on a loopback ephemeral port and real ws clients. */

export const silentLogger = pino({ level: 'silent' });

export function startTestDaemon(overrides: Partial<DaemonConfig> = {}): Promise<RunningDaemon> {
  return startDaemon({ host: '127.0.0.1', port: 0, workers: 2, stateDir: null, staticDir: null, logger: silentLogger, ...overrides });
}

export function wsUrl(daemon: RunningDaemon, path: string, token?: string): string {
  const base = daemon.url.replace(/^http/, 'ws') + path;
  return token === undefined ? base : `${base}?token=${encodeURIComponent(token)}`;
}

/** A WebSocket client that decodes every message and lets a test wait for the ones it expects. */
export class TestClient {
  readonly received: Message[] = [];
  private waiters: Array<{ match: (m: Message) => boolean; resolve: (m: Message) => void }> = [];
  closed: { code: number; reason: string } | undefined;
  private readonly closeWaiters: Array<() => void> = [];

  private constructor(readonly ws: WebSocket) {
    ws.on('message', (data: Buffer) => {
      const msg = decode(new Uint8Array(data));
      this.received.push(msg);
      this.waiters = this.waiters.filter((w) => {
        if (!w.match(msg)) return true;
        w.resolve(msg);
        return false;
      });
    });
    ws.on('close', (code, reason) => {
      this.closed = { code, reason: reason.toString() };
      for (const wake of this.closeWaiters.splice(0)) wake();
    });
    ws.on('error', () => undefined);
  }

  static connect(url: string, options: WebSocket.ClientOptions = {}): Promise<TestClient> {
    return new Promise((resolve, reject) => {
      const ws = new WebSocket(url, { perMessageDeflate: false, ...options });
      const client = new TestClient(ws);
      ws.once('open', () => resolve(client));
      ws.once('unexpected-response', (_req, res) => {
        let body = '';
        res.on('data', (c: Buffer) => (body += c.toString()));
        res.on('end', () => reject(new RefusedConnection(res.statusCode ?? 0, body)));
      });
      ws.once('error', reject);
    });
  }

  send(msg: Message): void {
    this.ws.send(encode(msg));
  }

  sendRaw(bytes: Uint8Array | string): void {
    this.ws.send(bytes);
  }

  /** The first message (already received or still to come) that matches. */
  next<T extends Message = Message>(match: (m: Message) => boolean, timeoutMs = 20_000, what = 'a message'): Promise<T> {
    const seen = this.received.find(match);
    if (seen) return Promise.resolve(seen as T);
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`timed out waiting for ${what}`)), timeoutMs);
      this.waiters.push({
        match,
        resolve: (m) => {
          clearTimeout(timer);
          resolve(m as T);
        },
      });
    });
  }

  ofType<T extends Message['type']>(type: T): Extract<Message, { type: T }>[] {
    return this.received.filter((m) => m.type === type) as Extract<Message, { type: T }>[];
  }

  whenClosed(): Promise<void> {
    return this.closed ? Promise.resolve() : new Promise((resolve) => this.closeWaiters.push(resolve));
  }

  close(): void {
    this.ws.close();
  }
}

export class RefusedConnection extends Error {
  constructor(
    readonly status: number,
    readonly body: string,
  ) {
    super(`connection refused with HTTP ${status}: ${body}`);
  }
}

/** Declares a stream and returns the daemon's answer. */
export async function declare(client: TestClient, stream: StreamDeclaration, ref = `d-${stream.name}`): Promise<Extract<Message, { type: 'declared' }>> {
  client.send({ v: 1, type: 'declare', ref, stream });
  const reply = await client.next((m) => (m.type === 'declared' || m.type === 'error') && 'ref' in m && m.ref === ref, 30_000, `declared ${stream.name}`);
  if (reply.type !== 'declared') throw new Error(`declare failed: ${JSON.stringify(reply)}`);
  return reply;
}

export function frameMessage(stream: string, seq: number, y: Float64Array, sigma?: number): Message {
  return { v: 1, type: 'frame', stream, seq, time: Date.now(), y: float64ToBin(y), ...(sigma !== undefined ? { sigma } : {}) };
}

export function decodedCoefficients(r: ResultMessage): { indices: Uint32Array; values: Float64Array } {
  if (r.coefficients === undefined) return { indices: new Uint32Array(0), values: new Float64Array(0) };
  return sparseFromWire(r.coefficients);
}

export function decodedSignal(r: ResultMessage): Float64Array {
  if (r.signal === undefined) throw new Error(`result ${r.stream}#${r.seq} has no signal`);
  return binToFloat64(r.signal);
}

/** ‖a − b‖ / ‖b‖ over interleaved complex vectors. */
export function relativeError(a: Float64Array, b: Float64Array): number {
  let num = 0;
  let den = 0;
  for (let i = 0; i < b.length; i++) {
    num += (a[i]! - b[i]!) ** 2;
    den += b[i]! ** 2;
  }
  return Math.sqrt(num / den);
}

/** Polls until `check` holds (for state that changes asynchronously); never asserts time. */
export async function eventually(check: () => boolean | Promise<boolean>, what: string, timeoutMs = 20_000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!(await check())) {
    if (Date.now() > deadline) throw new Error(`timed out waiting until ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

/** A Prometheus text-format sample value (sum over label sets matching `labels`). */
export function metricValue(text: string, name: string, labels: Record<string, string> = {}): number {
  let total = 0;
  for (const line of text.split('\n')) {
    if (line.startsWith('#')) continue;
    const m = /^([a-zA-Z_:][a-zA-Z0-9_:]*)(\{[^}]*\})? (.+)$/.exec(line);
    if (!m || m[1] !== name) continue;
    const set = m[2] ?? '';
    if (Object.entries(labels).every(([k, v]) => set.includes(`${k}="${v}"`))) total += Number(m[3]);
  }
  return total;
}
