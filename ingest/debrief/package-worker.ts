/**
 * Worker-thread entry: builds one debrief package and answers with it zipped, so that the live
 * service's event loop (which acknowledges points) never waits for the charts (about 1.5 s for 18
 * runs). One request per worker; ./offthread.ts starts it and ends it.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { buildPackage, zipPackage } from './package.js';
import type { DebriefInput } from './source.js';

const port = parentPort;
if (!port) throw new Error('package-worker must run in a worker thread');
const { input, title, generatedAt } = workerData as { input: DebriefInput; title?: string; generatedAt: string };
try {
  const zip = zipPackage(buildPackage(input, { title, generatedAt: new Date(generatedAt) }));
  port.postMessage({ ok: true, zip }, [zip.buffer as ArrayBuffer]);
} catch (e) {
  port.postMessage({ ok: false, message: e instanceof Error ? (e.stack ?? e.message) : String(e) });
}
