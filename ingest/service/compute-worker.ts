/**
 * Worker-thread entry: runs ./compute.ts off the service's event loop. Requests are handled one at
 * a time in arrival order; the main side (./assessor.ts) decides what to send and when.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { Compute, type ComputeConfig } from './compute.js';
import type { WorkerReply, WorkerRequest } from './assessor.js';

const port = parentPort;
if (!port) throw new Error('compute-worker must run in a worker thread');
const compute = new Compute(workerData as ComputeConfig);

port.on('message', (req: WorkerRequest) => {
  let reply: WorkerReply;
  try {
    switch (req.kind) {
      case 'sims':
        reply = { kind: 'sims', id: req.id, vignette: req.vignette, count: compute.addSims(req.vignette, req.tracks) };
        break;
      case 'fit':
        reply = { kind: 'fit', id: req.id, result: compute.fit(req.vignette, req.cached) };
        break;
      case 'assess':
        reply = { kind: 'assess', id: req.id, result: compute.assess(req.vignette, req.run, req.mode) };
        break;
      case 'evidence':
        reply = { kind: 'evidence', id: req.id, result: compute.evidence(req.runs, req.alpha) };
        break;
    }
  } catch (e) {
    reply = { kind: 'failed', id: req.id, message: e instanceof Error ? (e.stack ?? e.message) : String(e) };
  }
  port.postMessage(reply);
});
