/**
 * The page's one WebSocket to the daemon's watch endpoint: subscribes on every (re)connect,
 * hands each decoded message on, and reconnects by itself with growing, jittered delays.
 */
import { decode, encode } from '../../../protocol/codec.js';
import type { DaemonToSubscriber, Message, SubscribeMessage } from '../../../protocol/messages.js';
import { Backoff, type BackoffSettings } from '../../backoff.js';

export type LinkState =
  | { kind: 'connecting'; attempt: number }
  | { kind: 'live' }
  | { kind: 'waiting'; attempt: number; retryAt: number; reason: string }
  | { kind: 'stopped' };

/** The part of the WebSocket interface the connection uses (the browser's, or ws's in tests). */
export interface SocketLike {
  binaryType: string;
  onopen: ((ev: unknown) => void) | null;
  onmessage: ((ev: { data: unknown }) => void) | null;
  onclose: ((ev: { code: number; reason: string }) => void) | null;
  onerror: ((ev: unknown) => void) | null;
  send(data: Uint8Array): void;
  close(code?: number, reason?: string): void;
}

/**
 * A page waits longer between attempts than a producer would: many pages may be open on one
 * daemon, and a person is reading, not a sensor waiting to send.
 */
export const PAGE_BACKOFF: BackoffSettings = { initialMs: 500, maxMs: 15_000, factor: 2, jitter: 0.25 };

export interface WatchLinkOptions {
  url: string;
  /** The subscribe message to send after each open. */
  subscription: () => SubscribeMessage;
  onMessage: (message: DaemonToSubscriber, receivedAt: number) => void;
  onState: (state: LinkState) => void;
  /** A message the page could not decode or did not expect (counted, shown, never fatal). */
  onBadMessage: (problem: string) => void;
  backoff?: BackoffSettings;
  openSocket?: (url: string) => SocketLike;
  now?: () => number;
  random?: () => number;
}

export class WatchLink {
  private socket: SocketLike | null = null;
  private attempt = 0;
  private timer: ReturnType<typeof setTimeout> | null = null;
  private stopped = false;
  private readonly backoff: Backoff;
  private readonly openSocket: (url: string) => SocketLike;
  private readonly now: () => number;

  constructor(private readonly options: WatchLinkOptions) {
    this.backoff = new Backoff(options.backoff ?? PAGE_BACKOFF, options.random);
    this.openSocket = options.openSocket ?? ((url) => new WebSocket(url) as unknown as SocketLike);
    this.now = options.now ?? (() => Date.now());
  }

  start(): void {
    this.stopped = false;
    this.connect();
  }

  stop(): void {
    this.stopped = true;
    if (this.timer) clearTimeout(this.timer);
    this.timer = null;
    const socket = this.socket;
    this.socket = null;
    socket?.close(1000, 'page closed');
    this.options.onState({ kind: 'stopped' });
  }

  /** Skips the wait before the next attempt (the page's "try now" button). */
  retryNow(): void {
    if (this.stopped) return;
    if (this.timer) clearTimeout(this.timer);
    this.timer = null;
    if (!this.socket) this.connect();
  }

  private connect(): void {
    this.timer = null;
    this.options.onState({ kind: 'connecting', attempt: this.attempt });
    let socket: SocketLike;
    try {
      socket = this.openSocket(this.options.url);
    } catch (err) {
      this.scheduleRetry(`cannot open: ${(err as Error).message}`);
      return;
    }
    this.socket = socket;
    socket.binaryType = 'arraybuffer';
    socket.onopen = () => {
      if (this.socket !== socket) return;
      socket.send(encode(this.options.subscription()));
    };
    socket.onmessage = (ev) => {
      if (this.socket !== socket) return;
      const message = this.decodeMessage(ev.data);
      if (!message) return;
      // The link counts as healthy once the daemon has accepted the subscription, not merely
      // on open: a daemon that refuses us (bad token) must not be hammered without delay.
      if (message.type === 'subscribed') {
        this.attempt = 0;
        this.backoff.reset();
        this.options.onState({ kind: 'live' });
      }
      this.options.onMessage(message, this.now());
    };
    socket.onerror = () => {
      // A close event always follows; the retry is scheduled there.
    };
    socket.onclose = (ev) => {
      if (this.socket !== socket) return;
      this.socket = null;
      if (!this.stopped) this.scheduleRetry(closeReason(ev));
    };
  }

  private scheduleRetry(reason: string): void {
    const delay = this.backoff.next();
    const attempt = this.attempt;
    this.attempt++;
    this.options.onState({ kind: 'waiting', attempt, retryAt: this.now() + delay, reason });
    this.timer = setTimeout(() => this.connect(), delay);
  }

  private decodeMessage(data: unknown): DaemonToSubscriber | null {
    if (!(data instanceof ArrayBuffer)) {
      this.options.onBadMessage('a text frame (the protocol uses binary MessagePack only)');
      return null;
    }
    let message: Message;
    try {
      message = decode(new Uint8Array(data));
    } catch (err) {
      this.options.onBadMessage((err as Error).message);
      return null;
    }
    if (!SUBSCRIBER_TYPES.has(message.type)) {
      this.options.onBadMessage(`unexpected message type ${message.type}`);
      return null;
    }
    return message as DaemonToSubscriber;
  }
}

/**
 * Why the socket closed, in plain words. A browser reports a failed or refused connection
 * (including an HTTP 401 to the upgrade: it does not let pages see the status) as code 1006
 * with no reason.
 */
function closeReason(ev: { code: number; reason: string }): string {
  if (ev.reason) return ev.reason;
  return ev.code === 1006 ? 'connection failed or refused' : `closed with code ${ev.code}`;
}

const SUBSCRIBER_TYPES: ReadonlySet<string> = new Set<DaemonToSubscriber['type']>([
  'subscribed', 'unsubscribed', 'result', 'alert', 'missed', 'stream_event', 'error',
]);
