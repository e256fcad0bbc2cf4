// Entry of every worker thread of the API: loads the TypeScript module named in workerData.entry
// through tsx's public API (the API itself runs under `node --import tsx`, whose loader hooks do
// not reach worker threads on Node 20).
import { workerData } from 'node:worker_threads';
import { tsImport } from 'tsx/esm/api';

await tsImport(workerData.entry, import.meta.url);
