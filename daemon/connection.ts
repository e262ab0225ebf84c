import type { Duplex } from 'node:stream';
import type { Logger } from 'pino';
import type { RawData, WebSocket } from 'ws';
import { ProtocolError, decode, encodeTrusted, type ErrorCode, type Message } from '../protocol/index.js';
import type { Principal } from './access.js';
import type { DaemonCore } from './core.js';

/** A request that cannot be served; the connection answers with an `error` message. */
export class RequestError extends Error {
  constructor(
    readonly code: ErrorCode,
    message: string,
    readonly field?: string,
  ) {
    super(message);
    this.name = 'RequestError';
  }
}

export interface ErrorDetails {
  ref?: string;
  stream?: string;
  field?: string;
}

/**
 * What producer and subscriber connections share: decoding one message per WebSocket message
 * (binary only), answering anything wrong with an `error` that names the problem while the
 * connection carries on, and logging faults of our own without crashing.
 */
export abstract class Connection {
  protected readonly log: Logger;
  /** Bytes handed to the socket so far (the heartbeat judges how long a reply may take from it). */
  bytesSent = 0;

  constructor(
    readonly ws: WebSocket,
    /** The TCP (or TLS) socket under `ws`, corked while a turn's writes gather. */
    private readonly socket: Duplex,
    readonly principal: Principal,
    protected readonly core: DaemonCore,
    endpoint: 'produce' | 'watch',
    readonly connectionId: number,
  ) {
    this.log = core.log.child({ connection: connectionId, endpoint, principal: principal.id });
    ws.on('message', (data, isBinary) => this.receive(data, isBinary));
  }

  /** Sends a message from the daemon. */
  protected abstract deliver(bytes: Uint8Array): void;

  protected abstract handle(msg: Message): void | Promise<void>;

  /** A message failed to decode; subclasses may recover more from it (see ProducerSession). */
  protected rejected(err: ProtocolError, _data: Uint8Array): void {
    this.sendError(err.code, err.message, { ...(err.ref ? { ref: err.ref } : {}), ...(err.field ? { field: err.field } : {}) });
  }

  /** Sends bytes as one WebSocket message, written with the rest of this turn's writes. */
  protected sendBytes(bytes: Uint8Array, cb?: (err?: Error) => void): void {
    this.core.writes.hold(this.socket);
    this.bytesSent += bytes.byteLength;
    this.ws.send(bytes, cb);
  }

  send(msg: Message): void {
    this.deliver(encodeTrusted(msg));
  }

  sendError(code: ErrorCode, detail: string, details: ErrorDetails = {}): void {
    this.core.metrics.messagesRejected.inc({ code });
    this.send({ v: 1, type: 'error', code, detail, ...details });
  }

  private receive(data: RawData, isBinary: boolean): void {
    // Nothing a peer sends may take the daemon down: every path ends in a reply or a log line.
    try {
      this.dispatch(data, isBinary);
    } catch (err) {
      this.log.error({ err }, 'failed to process a message');
      try {
        this.sendError('internal', 'the daemon failed to process this message (logged)');
      } catch {
        // The connection is unusable; the peer will notice it closing or timing out.
      }
    }
  }

  private dispatch(data: RawData, isBinary: boolean): void {
    if (!isBinary) {
      this.sendError('malformed', 'messages must be binary MessagePack; text frames are not accepted');
      return;
    }
    const bytes = data as Buffer;
    let msg: Message;
    try {
      msg = decode(bytes);
    } catch (err) {
      const problem = err instanceof ProtocolError ? err : new ProtocolError('malformed', `could not decode: ${(err as Error).message}`);
      return this.rejected(problem, bytes);
    }
    const ref = 'ref' in msg ? msg.ref : undefined;
    const stream = 'stream' in msg && typeof msg.stream === 'string' ? msg.stream : undefined;
    const fail = (err: unknown) => {
      if (this.ws.readyState !== this.ws.OPEN) return;
      if (err instanceof RequestError) {
        this.sendError(err.code, err.message, { ...(ref ? { ref } : {}), ...(stream ? { stream } : {}), ...(err.field ? { field: err.field } : {}) });
      } else {
        this.log.error({ err, type: msg.type }, 'failed to handle a message');
        this.sendError('internal', 'the daemon failed to handle this message (logged)', ref ? { ref } : {});
      }
    };
    try {
      const done = this.handle(msg);
      if (done instanceof Promise) {
        done.catch((err: unknown) => {
          try {
            fail(err);
          } catch (inner) {
            this.log.error({ err: inner }, 'could not report a failed message');
          }
        });
      }
    } catch (err) {
      fail(err);
    }
  }
}
