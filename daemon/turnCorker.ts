import type { Duplex } from 'node:stream';

/**
 * Gathers what the daemon writes to each connection during one turn of the event loop into as
 * few system calls as possible. The first write of a turn corks the socket; every corked socket
 * is uncorked together once the turn's I/O callbacks have run (setImmediate). Under load a frame
 * costs a result per subscriber plus an ack and a credit to its producer: written one by one,
 * each was a system call of its own, and the socket writes were the daemon's largest cost.
 */
export class TurnCorker {
  private readonly corked = new Set<Duplex>();
  private scheduled = false;

  /** Call before writing to `socket`: the write is held until the end of this turn. */
  hold(socket: Duplex): void {
    if (this.corked.has(socket)) return;
    socket.cork();
    this.corked.add(socket);
    if (!this.scheduled) {
      this.scheduled = true;
      setImmediate(() => this.release());
    }
  }

  /** Writes everything held now. */
  release(): void {
    this.scheduled = false;
    for (const socket of this.corked) socket.uncork();
    this.corked.clear();
  }
}
