/**
 * Simulated runs that arrive after a baseline was fitted are fitted too: the refit uses every
 * simulated run the service holds (before the fix, a refit requested while the worker was idle
 * left a finished fit registered as pending, and every later refit of the vignette got its result).
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { writeDemoFiles } from '../../../ingest/cli/demo-files.js';
import { loadPlan } from '../../../ingest/plan.js';
import { replay } from '../../../ingest/service/replay.js';
import { startServer } from '../../../ingest/service/server.js';
import { readTracks } from '../../../ingest/tracks-reader.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-refit-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('refits as simulated runs keep arriving', () => {
  it.each([false, true])('the second batch of simulated runs is fitted (restart between the batches: %s)', async (restart) => {
    const files = await writeDemoFiles(join(dir, `demo-${restart}`), { seed: 3, simsPerVignette: 30 });
    const plan = await loadPlan(files.plan);
    const sims = (await readTracks(files.baseline, plan)).tracks.filter((t) => t.vignette === 'S1-L1');
    const journalPath = join(dir, `j-${restart}.sqlite`);
    let s = await startServer({ planPath: files.plan, journalPath, port: 0, refitDelayMs: 50, inProcessCompute: true });
    try {
      await replay({ url: `${s.url.replace('http', 'ws')}/feed`, plan, live: [], sims: sims.slice(0, 20), speed: 0 });
      await s.service.settle();
      expect(s.service.snapshot().vignettes[0].baseline).toMatchObject({ status: 'ready', sims: 20 });
      if (restart) {
        await s.close();
        s = await startServer({ journalPath, port: 0, refitDelayMs: 50, inProcessCompute: true });
      }
      await replay({ url: `${s.url.replace('http', 'ws')}/feed`, plan, live: [], sims: sims.slice(20), speed: 0 });
      await s.service.settle();
      expect(s.service.snapshot().vignettes[0].baseline).toMatchObject({ status: 'ready', sims: 30 });
    } finally {
      await s.close();
    }
  });
});
