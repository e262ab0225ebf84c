import { EventEmitter } from 'node:events';

/**
 * A Node EventEmitter with typed event names and listener arguments. `Events` maps each event
 * name to its listener's argument tuple.
 */
export class TypedEmitter<Events extends { [K in keyof Events]: unknown[] }> {
  readonly #inner = new EventEmitter();

  on<K extends keyof Events & string>(event: K, listener: (...args: Events[K]) => void): this {
    this.#inner.on(event, listener as (...args: unknown[]) => void);
    return this;
  }

  once<K extends keyof Events & string>(event: K, listener: (...args: Events[K]) => void): this {
    this.#inner.once(event, listener as (...args: unknown[]) => void);
    return this;
  }

  off<K extends keyof Events & string>(event: K, listener: (...args: Events[K]) => void): this {
    this.#inner.off(event, listener as (...args: unknown[]) => void);
    return this;
  }

  protected emit<K extends keyof Events & string>(event: K, ...args: Events[K]): void {
    this.#inner.emit(event, ...args);
  }
}
