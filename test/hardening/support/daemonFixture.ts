import { Session } from 'node:inspector/promises';
import { startDaemon, type DaemonConfig } from '../../../daemon/index.js';

/**
 * A real daemon in its own process, for the fault and attack suites: started from a JSON config
 * (environment SPARSEWIRE_FIXTURE_CONFIG), logging with its own pino logger to stderr, printing
 * `listening <url>` on stdout. Over the IPC channel it answers what a test cannot see from
 * outside: memory after a forced garbage collection (run with --expose-gc), metrics, and fault
 * injection into its solver workers. SIGTERM closes it gracefully; SIGKILL is SIGKILL.
 */

type Request = { id: number; cmd: 'memory' | 'metrics' | 'assignments' | 'outboxes' | 'killWorker' | 'throwInWorker'; index?: number };

const config = JSON.parse(process.env.SPARSEWIRE_FIXTURE_CONFIG ?? '{}') as Partial<DaemonConfig>;
const daemon = await startDaemon(config);
process.stdout.write(`listening ${daemon.url}\n`);

const gc = (globalThis as { gc?: () => void }).gc;

/** Solver worker threads, by pool slot (read from the pool's private slots: this is a test fixture). */
function workerThreadId(index: number): number {
  const slots = (daemon.core.pool as unknown as { slots: Array<{ worker: { threadId: number } }> }).slots;
  const slot = slots[index];
  if (slot === undefined) throw new Error(`no worker ${index}`);
  return slot.worker.threadId;
}

/**
 * Makes a solver worker throw an uncaught exception from its own event loop, through the
 * inspector's worker domain: the worker's code is not changed and nothing else is touched.
 */
async function throwInWorker(index: number): Promise<void> {
  const threadId = workerThreadId(index);
  const session = new Session();
  session.connect();
  try {
    const attached = new Promise<string>((resolve) => {
      session.on('NodeWorker.attachedToWorker', (m) => {
        const info = m.params.workerInfo as { title: string };
        if (info.title === `[worker ${threadId}]`) resolve(m.params.sessionId);
      });
    });
    await session.post('NodeWorker.enable', { waitForDebuggerOnStart: false });
    const sessionId = await attached;
    const expression = "setImmediate(() => { throw new Error('fault injected by the hardening suite') }); 'armed'";
    await session.post('NodeWorker.sendMessageToWorker', { sessionId, message: JSON.stringify({ id: 1, method: 'Runtime.evaluate', params: { expression } }) });
  } finally {
    session.disconnect();
  }
}

async function answer(req: Request): Promise<unknown> {
  switch (req.cmd) {
    case 'memory':
      for (let i = 0; i < 3; i++) gc?.();
      return { ...process.memoryUsage(), gcForced: gc !== undefined };
    case 'metrics':
      return daemon.metricsText();
    case 'assignments':
      return Object.fromEntries(daemon.core.pool.assignments());
    case 'outboxes':
      return daemon.subscriberOutboxes();
    case 'killWorker':
      await daemon.core.pool.terminateWorker(req.index ?? 0);
      return 'killed';
    case 'throwInWorker':
      await throwInWorker(req.index ?? 0);
      return 'armed';
  }
}

process.on('message', (req: Request) => {
  answer(req).then(
    (value) => process.send?.({ id: req.id, ok: true, value }),
    (err: Error) => process.send?.({ id: req.id, ok: false, error: err.message }),
  );
});

process.once('SIGTERM', () => {
  daemon.close('stopped by the test').then(() => process.exit(0));
});
