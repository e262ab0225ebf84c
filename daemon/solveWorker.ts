import { parentPort } from 'node:worker_threads';
import { StreamSolver, DeclarationError } from '../pipeline/streamSolver.js';
import type { WorkerReply, WorkerRequest } from './workerProtocol.js';

/**
 * A solver worker: holds the operators and warm states of the streams pinned to it and solves
 * their frames one message at a time. Result arrays are transferred back, not copied.
 */
const port = parentPort;
if (port === null) throw new Error('solveWorker must run in a worker thread');

const streams = new Map<string, StreamSolver>();

function reply(message: WorkerReply, transfer: ArrayBuffer[] = []): void {
  port!.postMessage(message, transfer);
}

port.on('message', (req: WorkerRequest) => {
  try {
    switch (req.type) {
      case 'open': {
        const solver = new StreamSolver(req.declaration);
        streams.set(req.stream, solver);
        return reply({ id: req.id, ok: true, shape: solver.shape });
      }
      case 'solve': {
        const solver = streams.get(req.stream);
        if (solver === undefined) return reply({ id: req.id, ok: false, error: `stream "${req.stream}" is not open on this worker` });
        const output = solver.solve(req.y, req.sigma, req.wantSignal);
        const transfer = [output.indices.buffer, output.values.buffer, output.y.buffer] as ArrayBuffer[];
        if (output.signal) transfer.push(output.signal.buffer as ArrayBuffer);
        return reply({ id: req.id, ok: true, output }, transfer);
      }
      case 'close':
        streams.delete(req.stream);
        return reply({ id: req.id, ok: true });
    }
  } catch (err: unknown) {
    const field = err instanceof DeclarationError ? err.field : undefined;
    reply({ id: req.id, ok: false, error: err instanceof Error ? err.message : String(err), ...(field ? { field } : {}) });
  }
});
