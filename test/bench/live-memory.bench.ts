/**
 * Memory held per live point: `npm run bench:live-memory` (node --expose-gc). Prints figures,
 * asserts nothing. The service runs in process (its compute on the main thread, no baseline, so
 * nothing is judged); 20 live runs receive 6,000 points each (two channels, one point per message,
 * through `RunningServer.submit`: the same validate → journal → acknowledge path as /feed). The
 * heap and array buffers are measured after a full garbage collection before and after, and per
 * point held.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { startServer } from '../../ingest/service/server.js';
import type { ServerReply } from '../../ingest/service/protocol.js';

const gc = (globalThis as { gc?: () => void }).gc;
if (!gc) throw new Error('run with node --expose-gc');
const RUNS = 20;
const PER = 6000;
const dir = mkdtempSync(join(tmpdir(), 'plumbline-mem-'));
writeFileSync(join(dir, 'plan.json'), JSON.stringify({ name: 'memory (invented)', channels: [{ name: 'x', unit: 'm' }, { name: 'y', unit: 'm' }], vignettes: Array.from({ length: RUNS }, (_, i) => ({ id: `V${i + 1}`, horizon: 100_000 })) }));
const server = await startServer({ planPath: join(dir, 'plan.json'), journalPath: join(dir, 'journal.sqlite'), port: 0, inProcessCompute: true });
const used = () => {
  gc();
  gc();
  const m = process.memoryUsage();
  return m.heapUsed + m.arrayBuffers;
};
try {
  let pending = 0;
  let refused = 0;
  const reply = (r: ServerReply) => {
    if (r.type === 'error') refused++;
    if (r.type === 'ack' || r.type === 'error') pending--;
  };
  for (let k = 0; k < RUNS; k++) server.submit({ v: 1, type: 'open', id: `o${k}`, vignette: `V${k + 1}`, track: 'mem', source: 'live', channels: ['x', 'y'] }, () => undefined);
  await new Promise((r) => setTimeout(r, 50));
  const before = used();
  for (let i = 0; i < PER; i++) {
    for (let k = 0; k < RUNS; k++) {
      pending++;
      server.submit({ v: 1, type: 'points', id: `p${i}`, vignette: `V${k + 1}`, track: 'mem', points: [{ seq: i + 1, t: i / 10, values: [1000 + Math.sin(i / 25) * 50, 2000 - i * 0.1] }] }, reply);
    }
    if (i % 100 === 99) while (pending > 0) await new Promise((r) => setImmediate(r));
  }
  while (pending > 0) await new Promise((r) => setImmediate(r));
  await new Promise((r) => setTimeout(r, 200));
  const after = used();
  const points = RUNS * PER;
  const mib = (b: number) => (b / 1048576).toFixed(1);
  console.log(`live points held: ${points.toLocaleString('en')} (${refused} refused); heap + array buffers after a full GC: ${mib(before)} MiB before, ${mib(after)} MiB after = ${Math.round((after - before) / points)} bytes per point`);
} finally {
  await server.close();
  rmSync(dir, { recursive: true, force: true });
}
