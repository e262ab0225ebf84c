import { AccessRefusedError, type ConnectionOptions } from '../clients/index.js';
import { DEFAULT_DAEMON, str, UsageError, type OptionValues } from './args.js';
import { EXIT } from './exitCodes.js';

/** Plumbing shared by the client commands: where the daemon is, when to stop, how errors exit. */

export function connectionOptions(values: OptionValues): ConnectionOptions {
  const url = str(values, 'daemon') ?? DEFAULT_DAEMON;
  try {
    new URL(url);
  } catch {
    throw new UsageError(`--daemon must be an address like ${DEFAULT_DAEMON}, got "${url}"`);
  }
  const token = str(values, 'token');
  return { url, ...(token ? { token } : {}) };
}

/**
 * Aborts on Ctrl-C (SIGINT), SIGTERM, or after `seconds` when given. Ctrl-C is the normal way
 * to stop the long-running commands, so it does not make the exit code non-zero.
 */
export function stopWhen(seconds?: number): { signal: AbortSignal; stopped: Promise<void>; abort: () => void; dispose: () => void } {
  const controller = new AbortController();
  const stop = () => controller.abort();
  process.once('SIGINT', stop);
  process.once('SIGTERM', stop);
  const timer = seconds !== undefined ? setTimeout(stop, seconds * 1000) : null;
  const stopped = new Promise<void>((resolve) => controller.signal.addEventListener('abort', () => resolve(), { once: true }));
  return {
    signal: controller.signal,
    stopped,
    abort: stop,
    dispose: () => {
      process.off('SIGINT', stop);
      process.off('SIGTERM', stop);
      if (timer) clearTimeout(timer);
    },
  };
}

/** Prints a failure in the command's name and returns the exit code it maps to. */
export function reportFailure(command: string, err: unknown): number {
  const message = err instanceof Error ? err.message : String(err);
  process.stderr.write(`sparsewire ${command}: ${message}\n`);
  if (err instanceof UsageError) {
    process.stderr.write(`(see sparsewire ${command} --help)\n`);
    return EXIT.usage;
  }
  if (err instanceof AccessRefusedError) return EXIT.accessRefused;
  return EXIT.failure;
}
