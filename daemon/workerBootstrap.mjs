// Worker threads on Node 20 do not inherit the tsx loader from --import, so each worker
// registers it here before importing its TypeScript entry module.
import { register } from 'tsx/esm/api';
import { workerData } from 'node:worker_threads';

register();
await import(workerData.entry);
