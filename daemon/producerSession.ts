import { unpack } from 'msgpackr';
import type { CloseMessage, DeclareMessage, FrameMessage, Message, ProtocolError } from '../protocol/index.js';
import { isPlainMap, streamNameProblem } from '../protocol/index.js';
import type { IngestVerdict } from '../pipeline/pipeline.js';
import type { RefusalReason } from '../pipeline/types.js';
import { mayAct } from './access.js';
import { Connection, RequestError } from './connection.js';

interface PendingAck {
  solved: number;
  dropped: number;
  grant: number;
  lastFinished: number;
}

/**
 * One producer connection (`/v1/produce`): declares streams, sends frames, closes streams.
 * Every frame is answered: refused at once with a reason, or — once solved or dropped — counted
 * in a batched `ack`, and its credit returned with a batched `credit`.
 */
export class ProducerSession extends Connection {
  /** Streams this connection declared (and still produces). */
  readonly attached = new Set<string>();
  /** Streams whose declaration is being handled (not answered yet). */
  private readonly declaring = new Set<string>();
  private readonly pending = new Map<string, PendingAck>();
  private flushScheduled = false;

  protected deliver(bytes: Uint8Array): void {
    if (this.ws.readyState !== this.ws.OPEN) return;
    // A producer that never reads its acks must not make the daemon buffer without bound.
    if (this.ws.bufferedAmount > this.core.config.limits.outboxHardCapBytes) {
      this.log.warn('producer does not read its replies; terminating');
      this.ws.terminate();
      return;
    }
    this.sendBytes(bytes);
  }

  protected handle(msg: Message): Promise<void> | void {
    switch (msg.type) {
      case 'declare':
        return this.declare(msg);
      case 'frame':
        return this.frame(msg);
      case 'close':
        return this.closeStream(msg);
      default:
        throw new RequestError('wrong_endpoint', `"${msg.type}" is not a producer message; subscribers connect to /v1/watch`, 'type');
    }
  }

  private async declare(msg: DeclareMessage): Promise<void> {
    const name = msg.stream.name;
    if (!mayAct(this.principal, 'produce', name)) {
      throw new RequestError('forbidden', `this token may not produce stream "${name}"`, 'stream.name');
    }
    // Declarations still being built count too, or a burst of them would all pass this check.
    const held = new Set([...this.attached, ...this.declaring]);
    if (!held.has(name) && held.size >= this.core.config.limits.maxStreamsPerConnection) {
      throw new RequestError('limit_reached', `one connection may produce at most ${this.core.config.limits.maxStreamsPerConnection} streams`);
    }
    this.declaring.add(name);
    try {
      const { credits, nextSeq } = await this.core.declare(this, msg.stream);
      this.attached.add(name);
      this.send({ v: 1, type: 'declared', ref: msg.ref, stream: name, credits, next_seq: nextSeq });
    } finally {
      this.declaring.delete(name);
    }
  }

  private frame(msg: FrameMessage): Promise<void> | void {
    this.core.metrics.framesReceived.inc();
    const { stream, seq } = msg;
    if (!mayAct(this.principal, 'produce', stream)) return this.refuse(stream, seq, 'forbidden', `this token may not produce stream "${stream}"`);
    if (!this.attached.has(stream)) {
      return this.refuse(stream, seq, 'unknown_stream', `stream "${stream}" is not declared on this connection`);
    }
    const verdict = this.core.ingest({
      stream,
      seq,
      time: msg.time,
      yBytes: msg.y,
      ...(msg.sigma !== undefined ? { sigma: msg.sigma } : {}),
      receivedAt: performance.now(),
    });
    if (verdict instanceof Promise) return verdict.then((v) => this.settleFrame(stream, seq, v));
    this.settleFrame(stream, seq, verdict);
  }

  private settleFrame(stream: string, seq: number, verdict: IngestVerdict): void {
    if (verdict.accepted) {
      this.core.frameAccepted();
      return;
    }
    this.refuse(stream, seq, verdict.reason, verdict.field ? `${verdict.field}: ${verdict.detail}` : verdict.detail);
  }

  private async closeStream(msg: CloseMessage): Promise<void> {
    if (!mayAct(this.principal, 'produce', msg.stream)) throw new RequestError('forbidden', `this token may not produce stream "${msg.stream}"`, 'stream');
    if (!this.attached.has(msg.stream)) throw new RequestError('unknown_stream', `stream "${msg.stream}" is not declared on this connection`, 'stream');
    await this.core.closeStream(this, msg.stream);
    this.flushAcks();
    this.attached.delete(msg.stream);
    this.pending.delete(msg.stream);
    this.send({ v: 1, type: 'closed', ref: msg.ref, stream: msg.stream });
  }

  /** A frame that failed to decode: when its stream and seq can be read, answer with `refused`. */
  protected override rejected(err: ProtocolError, data: Uint8Array): void {
    const frame = peekFrame(data);
    if (frame === undefined) return super.rejected(err, data);
    this.core.metrics.framesReceived.inc();
    const reason = err.field === 'y' ? 'wrong_length' : 'invalid_field';
    this.refuse(frame.stream, frame.seq, reason, err.message);
  }

  /** Tells the producer a frame was not taken (cluster mode: also for frames its stream's owner refused). */
  refuse(stream: string, seq: number, reason: RefusalReason | 'invalid_field', detail: string): void {
    this.core.metrics.framesRefused.inc({ reason });
    this.send({ v: 1, type: 'refused', stream, seq, reason, detail });
    // The refused frame cost the producer a credit; give it back (only on its own streams).
    if (this.attached.has(stream)) this.account(stream).grant++;
  }

  /** Called by the daemon when a frame of an attached stream was solved or dropped. */
  noteFinished(stream: string, seq: number, how: 'solved' | 'dropped'): void {
    const p = this.account(stream);
    p[how]++;
    p.grant++;
    p.lastFinished = Math.max(p.lastFinished, seq);
  }

  /** The stream was taken over by a newer connection. */
  detach(stream: string, detail: string): void {
    this.attached.delete(stream);
    this.pending.delete(stream);
    this.sendError('declaration_conflict', detail, { stream });
  }

  /** Sends the batched acks and credits now. */
  flushAcks(): void {
    this.flushScheduled = false;
    for (const [stream, p] of this.pending) {
      const through = this.core.doneThrough(stream) ?? (p.lastFinished >= 0 ? p.lastFinished : undefined);
      if (p.solved + p.dropped > 0 && through !== undefined) {
        this.send({ v: 1, type: 'ack', stream, through_seq: through, solved: p.solved, dropped: p.dropped });
      }
      if (p.grant > 0) this.send({ v: 1, type: 'credit', stream, grant: p.grant });
    }
    this.pending.clear();
  }

  private account(stream: string): PendingAck {
    let p = this.pending.get(stream);
    if (p === undefined) this.pending.set(stream, (p = { solved: 0, dropped: 0, grant: 0, lastFinished: -1 }));
    if (!this.flushScheduled) {
      this.flushScheduled = true;
      setImmediate(() => this.flushAcks());
    }
    return p;
  }
}

/** Stream and seq of a message that looks like a frame but failed validation. */
function peekFrame(data: Uint8Array): { stream: string; seq: number } | undefined {
  try {
    const raw: unknown = unpack(data);
    if (!isPlainMap(raw) || raw.type !== 'frame') return undefined;
    const { stream, seq } = raw;
    if (typeof stream !== 'string' || streamNameProblem(stream) !== null || typeof seq !== 'number' || !Number.isSafeInteger(seq) || seq < 0) return undefined;
    return { stream, seq };
  } catch {
    return undefined;
  }
}
