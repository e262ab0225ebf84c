import { readFileSync } from 'node:fs';
import http from 'node:http';
import https from 'node:https';
import type { AddressInfo } from 'node:net';
import type { Duplex } from 'node:stream';
import pino, { type Logger } from 'pino';
import { WebSocketServer, type WebSocket } from 'ws';
import { hasRole, presentedToken, type Principal, type Role } from './access.js';
import type { DaemonConfig } from './config.js';
import { DaemonCore } from './core.js';
import type { OutboxStats } from './outbox.js';
import { PeerLiveness } from './liveness.js';
import { ProducerSession } from './producerSession.js';
import { serveStatic } from './staticFiles.js';
import { SubscriberSession } from './subscriberSession.js';

const GOING_AWAY = 1001;
/** How long a graceful shutdown waits for subscribers to take their last results, and for close handshakes. */
const FLUSH_WAIT_MS = 2000;

type Endpoint = 'produce' | 'watch';

export type CoreFactory = (config: DaemonConfig, log: Logger) => DaemonCore;

/** The network side: one HTTP(S) server carrying the WebSocket endpoints and the HTTP endpoints. */
export class DaemonServer {
  readonly core: DaemonCore;
  readonly log: Logger;
  private readonly server: http.Server;
  private readonly wss: WebSocketServer;
  /** Each connection's endpoint and the heartbeat's judgement of it. */
  private readonly peers = new WeakMap<WebSocket, { endpoint: Endpoint; liveness: PeerLiveness }>();

  private readonly connectionsPerGrant = new Map<string, number>();
  private readonly heartbeat: NodeJS.Timeout;
  private readonly startedAt = Date.now();
  private nextConnectionId = 1;
  private closing: Promise<void> | undefined;
  port = 0;

  /** `makeCore` replaces the single-node core (cluster mode plugs in here). */
  constructor(
    readonly config: DaemonConfig,
    makeCore: CoreFactory = (c, log) => new DaemonCore(c, log),
  ) {
    this.log = config.logger ?? pino({ level: config.logLevel, base: { service: 'sparsewire' } }, pino.destination(2));
    this.core = makeCore(config, this.log);
    const handler = (req: http.IncomingMessage, res: http.ServerResponse) => {
      this.handleHttp(req, res).catch((err: Error) => {
        // The path only: the query may carry ?token=.
        this.log.error({ err: err.message, path: (req.url ?? '').split('?')[0] }, 'HTTP request failed');
        if (!res.headersSent) json(res, 500, { error: 'internal', detail: 'the daemon failed to answer (logged)' });
        else res.destroy();
      });
    };
    this.server = config.tls
      ? https.createServer({ cert: readFileSync(config.tls.cert), key: readFileSync(config.tls.key) }, handler)
      : http.createServer(handler);
    this.wss = new WebSocketServer({ noServer: true, maxPayload: config.limits.maxMessageBytes, perMessageDeflate: false });
    this.server.on('upgrade', (req, socket, head) => this.upgrade(req, socket, head));
    this.heartbeat = setInterval(() => this.beat(), config.heartbeatMs);
    this.heartbeat.unref();
  }

  async listen(): Promise<void> {
    await new Promise<void>((resolve, reject) => {
      this.server.once('error', reject);
      this.server.listen(this.config.port, this.config.host, () => {
        this.server.off('error', reject);
        resolve();
      });
    });
    this.port = (this.server.address() as AddressInfo).port;
  }

  get url(): string {
    const host = this.config.host.includes(':') ? `[${this.config.host}]` : this.config.host;
    return `${this.config.tls ? 'https' : 'http'}://${host}:${this.port}`;
  }

  outboxStats(): OutboxStats[] {
    return [...this.core.fanout.subscribers].map((s) => s.outbox.stats());
  }

  /** Graceful shutdown: stop accepting, finish accepted frames, flush, close with a reason. */
  close(reason = 'daemon shutting down'): Promise<void> {
    this.closing ??= this.shutdown(reason.slice(0, 120));
    return this.closing;
  }

  private async shutdown(reason: string): Promise<void> {
    this.log.info({ reason }, 'shutting down');
    const serverClosed = new Promise<void>((resolve) => this.server.close(() => resolve()));
    await this.core.drain();
    await this.waitFor(() => this.outboxStats().every((s) => s.closed || s.pendingBytes === 0), FLUSH_WAIT_MS);
    for (const ws of this.wss.clients) ws.close(GOING_AWAY, reason);
    await this.waitFor(() => this.wss.clients.size === 0, FLUSH_WAIT_MS);
    for (const ws of this.wss.clients) ws.terminate();
    clearInterval(this.heartbeat);
    await this.core.destroy();
    this.server.closeAllConnections();
    await serverClosed;
    this.log.info('stopped');
  }

  private waitFor(done: () => boolean, timeoutMs: number): Promise<void> {
    const deadline = Date.now() + timeoutMs;
    return new Promise((resolve) => {
      const check = () => (done() || Date.now() >= deadline ? resolve() : setTimeout(check, 10));
      check();
    });
  }

  private upgrade(req: http.IncomingMessage, socket: Duplex, head: Buffer): void {
    socket.on('error', () => socket.destroy());
    const url = requestUrl(req);
    if (url === undefined) return this.refuse(socket, 400, 'bad_request', BAD_TARGET);
    const endpoint: Endpoint | undefined = url.pathname === '/v1/produce' ? 'produce' : url.pathname === '/v1/watch' ? 'watch' : undefined;
    if (endpoint === undefined) return this.refuse(socket, 404, 'unknown_path', `no WebSocket endpoint at ${url.pathname}; producers use /v1/produce, subscribers /v1/watch`);
    if (this.closing) return this.refuse(socket, 503, 'shutting_down', 'the daemon is shutting down');
    const auth = this.core.access.authenticate(presentedToken(req, url));
    if (!auth.ok) return this.refuse(socket, 401, auth.reason, auth.detail);
    const principal = auth.principal;
    if (!hasRole(principal, endpoint)) {
      return this.refuse(socket, 403, 'role_missing', `this token lacks the "${endpoint}" role needed for /v1/${endpoint}`);
    }
    const open = this.connectionsPerGrant.get(principal.id) ?? 0;
    if (!this.core.access.open && open >= this.config.limits.maxConnectionsPerToken) {
      return this.refuse(socket, 429, 'too_many_connections', `this token already has ${open} open connections (limit ${this.config.limits.maxConnectionsPerToken})`);
    }
    this.wss.handleUpgrade(req, socket, head, (ws) => this.accept(ws, socket, endpoint, principal));
  }

  private refuse(socket: Duplex, status: number, reason: string, detail: string): void {
    this.core.metrics.connectionsRefused.inc({ reason });
    this.log.info({ status, reason }, 'connection refused');
    const body = JSON.stringify({ error: reason, detail });
    socket.end(
      `HTTP/1.1 ${status} ${http.STATUS_CODES[status]}\r\nContent-Type: application/json\r\nContent-Length: ${Buffer.byteLength(body)}\r\n` +
        `X-Sparsewire-Refusal: ${reason}\r\nConnection: close\r\n\r\n${body}`,
    );
  }

  private accept(ws: WebSocket, socket: Duplex, endpoint: Endpoint, principal: Principal): void {
    const id = this.nextConnectionId++;
    this.connectionsPerGrant.set(principal.id, (this.connectionsPerGrant.get(principal.id) ?? 0) + 1);
    ws.on('error', (err) => this.log.debug({ connection: id, err: err.message }, 'connection error'));
    const session =
      endpoint === 'produce'
        ? new ProducerSession(ws, socket, principal, this.core, endpoint, id)
        : new SubscriberSession(ws, socket, principal, this.core, endpoint, id).init();
    let release: () => void;
    if (session instanceof ProducerSession) {
      this.core.producers.add(session);
      if (this.core.ingestIsPaused) ws.pause();
      release = () => this.core.releaseProducer(session);
    } else {
      this.core.fanout.add(session);
      release = () => {
        this.core.fanout.remove(session);
        session.dispose();
      };
    }
    const liveness = new PeerLiveness(() => session.bytesSent);
    this.peers.set(ws, { endpoint, liveness });
    ws.on('pong', () => liveness.answered());
    ws.on('close', () => {
      release();
      this.connectionsPerGrant.set(principal.id, this.connectionsPerGrant.get(principal.id)! - 1);
    });
    this.log.debug({ connection: id, endpoint, principal: principal.id }, 'connection accepted');
  }

  /** Ping every peer; one whose answer is overdue (see PeerLiveness) is dead and terminated. */
  private beat(): void {
    const now = performance.now();
    for (const ws of this.wss.clients) {
      // A socket we stopped reading (ingest paused) cannot show us its pongs: not its fault.
      if (ws.isPaused) continue;
      const peer = this.peers.get(ws);
      if (peer === undefined) continue;
      switch (peer.liveness.check(now, this.config.heartbeatMs, this.config.limits.minReadBytesPerSecond)) {
        case 'ping':
          ws.ping();
          break;
        case 'wait':
          break;
        case 'dead': {
          this.core.metrics.connectionsClosed.inc({ endpoint: peer.endpoint, reason: 'no_pong' });
          this.log.info({ endpoint: peer.endpoint }, 'peer did not answer a ping; terminated');
          ws.terminate();
        }
      }
    }
  }

  private async handleHttp(req: http.IncomingMessage, res: http.ServerResponse): Promise<void> {
    const url = requestUrl(req);
    if (url === undefined) return json(res, 400, { error: 'bad_request', detail: BAD_TARGET });
    if (req.method !== 'GET' && req.method !== 'HEAD') {
      res.setHeader('Allow', 'GET, HEAD');
      return json(res, 405, { error: 'method_not_allowed', detail: 'only GET and HEAD are served' });
    }
    switch (url.pathname) {
      case '/v1/health':
        return json(res, 200, {
          status: this.closing ? 'stopping' : 'ok',
          uptime_s: (Date.now() - this.startedAt) / 1000,
          streams: this.core.describeStreams().length,
          producers: this.core.producers.size,
          subscribers: this.core.fanout.subscribers.size,
          workers: this.core.pool.size,
        });
      case '/v1/metrics': {
        if (this.authorize(req, url, res, 'watch') === undefined) return;
        res.writeHead(200, { 'Content-Type': 'text/plain; version=0.0.4; charset=utf-8' });
        res.end(this.core.metrics.render());
        return;
      }
      case '/v1/streams': {
        const principal = this.authorize(req, url, res, 'watch');
        if (principal === undefined) return;
        return json(res, 200, { streams: this.core.describeStreams(principal) });
      }
    }
    if (this.config.staticDir !== null && (await serveStatic(this.config.staticDir, url.pathname, res, req.method === 'HEAD'))) return;
    json(res, 404, { error: 'not_found', detail: `nothing at ${url.pathname}` });
  }

  /** The caller's principal when it may use an HTTP endpoint needing `role`; else answers 401/403. */
  private authorize(req: http.IncomingMessage, url: URL, res: http.ServerResponse, role: Role): Principal | undefined {
    const auth = this.core.access.authenticate(presentedToken(req, url));
    if (!auth.ok) {
      json(res, 401, { error: auth.reason, detail: auth.detail });
      return undefined;
    }
    if (!hasRole(auth.principal, role)) {
      json(res, 403, { error: 'role_missing', detail: `this token lacks the "${role}" role` });
      return undefined;
    }
    return auth.principal;
  }
}

const BAD_TARGET = 'the request target is not a valid URL path';

/** The request's URL, or undefined when its target does not parse (e.g. `//host:99999/`). */
function requestUrl(req: http.IncomingMessage): URL | undefined {
  try {
    return new URL(req.url ?? '/', 'http://localhost');
  } catch {
    return undefined;
  }
}

function json(res: http.ServerResponse, status: number, body: unknown): void {
  const text = JSON.stringify(body);
  res.writeHead(status, { 'Content-Type': 'application/json; charset=utf-8', 'Content-Length': Buffer.byteLength(text) });
  res.end(text);
}
