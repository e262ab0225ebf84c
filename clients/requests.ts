import type { ErrorMessage, Message } from '../protocol/index.js';

/** The socket closed before the daemon answered; the request may be retried on a new socket. */
export class ConnectionLostError extends Error {
  override readonly name = 'ConnectionLostError';
}

/** The daemon answered a request with an `error` message. */
export class DaemonError extends Error {
  override readonly name = 'DaemonError';
  readonly code: string;
  readonly field?: string;
  constructor(readonly reply: ErrorMessage) {
    super(reply.field ? `${reply.code} at ${reply.field}: ${reply.detail}` : `${reply.code}: ${reply.detail}`);
    this.code = reply.code;
    this.field = reply.field;
  }
}

interface Waiter {
  type: Message['type'];
  resolve: (msg: Message) => void;
  reject: (err: Error) => void;
}

/** Matches replies to requests by `ref`. */
export class RequestTracker {
  readonly #waiting = new Map<string, Waiter>();

  expect<T extends Message>(ref: string, type: T['type']): Promise<T> {
    return new Promise<T>((resolve, reject) => {
      this.#waiting.set(ref, { type, resolve: resolve as (msg: Message) => void, reject });
    });
  }

  /** Resolves the request `ref` with its reply; false when nobody waited for it. */
  settle(ref: string, reply: Message): boolean {
    const waiter = this.#waiting.get(ref);
    if (!waiter || waiter.type !== reply.type) return false;
    this.#waiting.delete(ref);
    waiter.resolve(reply);
    return true;
  }

  /** Rejects the request `ref` with the daemon's error; false when nobody waited for it. */
  reject(ref: string, reply: ErrorMessage): boolean {
    return this.fail(ref, new DaemonError(reply));
  }

  fail(ref: string, err: Error): boolean {
    const waiter = this.#waiting.get(ref);
    if (!waiter) return false;
    this.#waiting.delete(ref);
    waiter.reject(err);
    return true;
  }

  /** The socket went down: requests made on it will get no reply. Their owners decide whether to retry. */
  failAll(err: Error): void {
    for (const waiter of this.#waiting.values()) waiter.reject(err);
    this.#waiting.clear();
  }
}
