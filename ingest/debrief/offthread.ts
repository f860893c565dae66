/**
 * The debrief package built on a worker thread (./package-worker.ts) and returned as a .zip: what
 * the service's GET /api/debrief.zip sends. Running from TypeScript sources (tests, tsx), the
 * worker is loaded through tsx's loader, as the computation worker is (../service/assessor.ts).
 */
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { DebriefInput } from './source.js';

export function zipInWorker(input: DebriefInput, options: { title?: string; generatedAt?: Date } = {}): Promise<Uint8Array> {
  const source = import.meta.url.endsWith('.ts');
  const url = new URL(`./package-worker${source ? '.ts' : '.js'}`, import.meta.url);
  const workerData = { input, title: options.title, generatedAt: (options.generatedAt ?? new Date()).toISOString() };
  let worker: Worker;
  if (source) {
    const api = pathToFileURL(createRequire(import.meta.url).resolve('tsx/esm/api').replace(/\.cjs$/, '.mjs')).href;
    const boot = `import(${JSON.stringify(api)}).then((m) => { m.register(); return import(${JSON.stringify(url.href)}); });`;
    worker = new Worker(boot, { eval: true, workerData });
  } else {
    worker = new Worker(url, { workerData });
  }
  return new Promise<Uint8Array>((resolve, reject) => {
    worker.once('message', (m: { ok: true; zip: Uint8Array } | { ok: false; message: string }) => {
      if (m.ok) resolve(m.zip);
      else reject(new Error(`debrief package: ${m.message}`));
      void worker.terminate();
    });
    worker.once('error', (e) => reject(e instanceof Error ? e : new Error(String(e))));
    worker.once('exit', (code) => {
      if (code !== 0) reject(new Error(`debrief worker exited with code ${code}`));
    });
  });
}
