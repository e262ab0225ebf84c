import WebSocket from 'ws';
import { decode, encode, MAX_MESSAGE_BYTES, ProtocolError, type Message } from '../protocol/index.js';
import { Backoff, DEFAULT_BACKOFF, type BackoffSettings } from './backoff.js';
import { TypedEmitter } from './emitter.js';

export interface ConnectionOptions {
  /** The daemon's address: `http://host:port` or `ws://host:port` (https/wss for TLS). */
  url: string;
  /** Access token, sent as `Authorization: Bearer <token>`. */
  token?: string;
  backoff?: Partial<BackoffSettings>;
  /** Keep retrying the very first connection instead of failing (default false). */
  retryFirstConnect?: boolean;
}

export type ConnectionEvents = {
  /** Every (re)connection; `reconnect` is false the first time. */
  open: [reconnect: boolean];
  /** The socket closed; a reconnect follows in `retryInMs` unless the connection was closed on purpose. */
  down: [info: { code: number; reason: string; retryInMs: number | null; error?: Error }];
  message: [msg: Message];
  /** A message from the daemon that did not decode (logged by the owner; the socket stays up). */
  garbled: [err: ProtocolError];
};

/** Thrown when the daemon refuses the token (HTTP 401/403): retrying cannot help. */
export class AccessRefusedError extends Error {
  override readonly name = 'AccessRefusedError';
  constructor(readonly status: number) {
    super(`the daemon refused access (HTTP ${status}): check the token and its roles`);
  }
}

/** Turns `http://h:p` (or `ws://h:p`) plus a path into the WebSocket URL. */
export function endpointUrl(base: string, path: string): string {
  const url = new URL(base);
  if (url.protocol === 'http:') url.protocol = 'ws:';
  else if (url.protocol === 'https:') url.protocol = 'wss:';
  else if (url.protocol !== 'ws:' && url.protocol !== 'wss:') {
    throw new Error(`unsupported address ${base}: use http://, https://, ws:// or wss://`);
  }
  url.pathname = path;
  return url.toString();
}

/**
 * One logical connection to a daemon endpoint that survives socket loss: it reconnects with
 * backoff and announces each new socket with `open`, so its owner can re-declare or re-subscribe.
 */
export class ReconnectingConnection extends TypedEmitter<ConnectionEvents> {
  readonly #url: string;
  readonly #options: ConnectionOptions;
  readonly #backoff: Backoff;
  #socket: WebSocket | null = null;
  #everOpened = false;
  #closing = false;
  #retryTimer: NodeJS.Timeout | null = null;

  constructor(options: ConnectionOptions, path: string) {
    super();
    this.#options = options;
    this.#url = endpointUrl(options.url, path);
    this.#backoff = new Backoff({ ...DEFAULT_BACKOFF, ...options.backoff });
  }

  get connected(): boolean {
    return this.#socket?.readyState === WebSocket.OPEN;
  }

  /** Opens the first socket. Rejects if it fails (unless retryFirstConnect) or access is refused. */
  start(): Promise<void> {
    return new Promise((resolve, reject) => {
      const onOpen = () => {
        this.off('open', onOpen);
        resolve();
      };
      this.on('open', onOpen);
      this.#dial((err) => {
        this.off('open', onOpen);
        reject(err);
      });
    });
  }

  /** Sends one message; resolves once written to the socket. Rejects when not connected. */
  send(msg: Message): Promise<void> {
    return this.sendBytes(encode(msg));
  }

  sendBytes(bytes: Uint8Array): Promise<void> {
    const socket = this.#socket;
    if (!socket || socket.readyState !== WebSocket.OPEN) return Promise.reject(new Error('not connected'));
    return new Promise((resolve, reject) => socket.send(bytes, { binary: true }, (err) => (err ? reject(err) : resolve())));
  }

  /** Closes for good: no reconnect. Resolves when the socket has closed. */
  async close(code = 1000, reason = 'client closing'): Promise<void> {
    this.#closing = true;
    if (this.#retryTimer) clearTimeout(this.#retryTimer);
    const socket = this.#socket;
    if (!socket || socket.readyState === WebSocket.CLOSED) return;
    await new Promise<void>((resolve) => {
      socket.once('close', () => resolve());
      if (socket.readyState === WebSocket.CONNECTING) socket.terminate();
      else socket.close(code, reason);
      // A peer that never answers the close handshake is cut off.
      setTimeout(() => socket.terminate(), 2000).unref();
    });
  }

  /** Drops the current socket abruptly (as a network failure would); a reconnect follows. */
  interrupt(): void {
    this.#socket?.terminate();
  }

  #dial(onFirstFailure?: (err: Error) => void): void {
    const headers: Record<string, string> = {};
    if (this.#options.token) headers.authorization = `Bearer ${this.#options.token}`;
    const socket = new WebSocket(this.#url, { headers, perMessageDeflate: false, maxPayload: MAX_MESSAGE_BYTES });
    this.#socket = socket;
    let failure: Error | null = null;

    socket.on('unexpected-response', (_req, res) => {
      const status = res.statusCode ?? 0;
      failure = status === 401 || status === 403 ? new AccessRefusedError(status) : new Error(`daemon answered HTTP ${status}`);
      res.resume();
      socket.terminate();
    });
    socket.on('error', (err) => {
      failure ??= err;
    });
    socket.on('open', () => {
      const reconnect = this.#everOpened;
      this.#everOpened = true;
      this.#backoff.reset();
      this.emit('open', reconnect);
    });
    socket.on('message', (data, isBinary) => {
      if (!isBinary) {
        this.emit('garbled', new ProtocolError('malformed', 'text message from the daemon'));
        return;
      }
      let msg: Message;
      try {
        msg = decode(data as Buffer);
      } catch (err) {
        if (err instanceof ProtocolError) this.emit('garbled', err);
        return;
      }
      this.emit('message', msg);
    });
    socket.on('close', (code, reasonBuffer) => {
      if (this.#socket === socket) this.#socket = null;
      const reason = reasonBuffer.toString();
      const firstFailure = !this.#everOpened && onFirstFailure && !this.#options.retryFirstConnect;
      const fatal = failure instanceof AccessRefusedError;
      if (this.#closing || firstFailure || fatal) {
        this.emit('down', { code, reason, retryInMs: null, ...(failure ? { error: failure } : {}) });
        if (!this.#everOpened && onFirstFailure) onFirstFailure(failure ?? new Error(`connection closed (${code} ${reason})`));
        return;
      }
      const retryInMs = this.#backoff.next();
      this.emit('down', { code, reason, retryInMs });
      this.#retryTimer = setTimeout(() => {
        this.#retryTimer = null;
        if (!this.#closing) this.#dial(this.#everOpened ? undefined : onFirstFailure);
      }, retryInMs);
    });
  }
}
