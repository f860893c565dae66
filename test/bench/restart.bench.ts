/**
 * Restart benchmark: `npm run bench:restart [-- --restarts N --sims-per-vignette N --sims-in journal|file --keep DIR]`.
 * Prints figures; asserts nothing about time.
 *
 * Builds the demo event (9 vignettes, 200 simulated runs each by default, one live run each) in a
 * fresh journal: with `--sims-in journal` (the default) the simulated runs are streamed over the
 * feed and journaled, as a simulation farm would send them; with `--sims-in file` they come from the
 * baseline file, as in `plumbline demo`. The live runs are flown at full speed and judged. Then the
 * service is started again on that journal N times, in this process (compute on its worker thread),
 * and each start is timed from `startServer` to its promise resolving: every vignette fitted (or
 * loaded from the fit cache) and the service accepting connections. The first restart after the
 * build is the one that may have to write the fit cache; all are printed.
 */
import { mkdtempSync, rmSync, statSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { parseArgs } from 'node:util';
import Database from 'better-sqlite3';
import { writeDemoFiles } from '../../ingest/cli/demo-files.js';
import { loadPlan } from '../../ingest/plan.js';
import { replay } from '../../ingest/service/replay.js';
import { startServer } from '../../ingest/service/server.js';
import { readTracks } from '../../ingest/tracks-reader.js';

const { values } = parseArgs({
  options: {
    restarts: { type: 'string', default: '5' },
    'sims-per-vignette': { type: 'string', default: '200' },
    'sims-in': { type: 'string', default: 'journal' },
    keep: { type: 'string' },
  },
});
const restarts = Number(values.restarts);
const simsPer = Number(values['sims-per-vignette']);
const simsIn = values['sims-in'] === 'file' ? 'file' : 'journal';
const dir = values.keep ?? mkdtempSync(join(tmpdir(), 'plumbline-rbench-'));
const journalPath = join(dir, 'journal.sqlite');
const mb = (n: number) => `${(n / 1048576).toFixed(1)} MiB`;
const load = () => loadavg().map((x) => x.toFixed(2)).join(', ');

async function main(): Promise<void> {
  const files = await writeDemoFiles(dir, { seed: 11, simsPerVignette: simsPer, liveRunsPerVignette: 1 });
  const plan = await loadPlan(files.plan);
  for (const suffix of ['', '-wal', '-shm']) rmSync(`${journalPath}${suffix}`, { force: true });
  const buildStart = performance.now();
  const first = await startServer({ planPath: files.plan, journalPath, port: 0, baselinePath: simsIn === 'file' ? files.baseline : undefined, refitDelayMs: 200 });
  const sims = simsIn === 'journal' ? (await readTracks(files.baseline, plan)).tracks : [];
  const live = files.scenario.live;
  const summary = await replay({ url: `${first.url.replace(/^http/, 'ws')}/feed`, plan, live, sims, speed: 0, overlap: 9, batch: 500 });
  await first.service.settle(600_000);
  await first.close();
  process.stdout.write(`built the journal in ${((performance.now() - buildStart) / 1000).toFixed(1)} s: ${summary.tracks} tracks, ${summary.points} points over the feed (simulated runs from the ${simsIn}); load average ${load()}\n`);

  const times: number[] = [];
  for (let i = 0; i < restarts; i++) {
    const t0 = performance.now();
    const s = await startServer({ journalPath, port: 0 });
    const ms = performance.now() - t0;
    times.push(ms);
    const states = s.service.snapshot().vignettes.map((v) => v.baseline.status);
    const ready = states.filter((x) => x === 'ready').length;
    const mem = process.memoryUsage();
    await s.service.settle(600_000);
    await s.close();
    process.stdout.write(`restart ${i + 1}: ready in ${ms.toFixed(0)} ms (${ready}/${states.length} baselines ready; this process rss ${mb(mem.rss)}); load average ${load()}\n`);
  }
  const sorted = [...times].sort((a, b) => a - b);
  const median = sorted[Math.floor(sorted.length / 2)];
  process.stdout.write(`restart to ready: median ${median.toFixed(0)} ms, min ${sorted[0].toFixed(0)} ms, max ${sorted[sorted.length - 1].toFixed(0)} ms over ${times.length} starts\n`);
  const db = new Database(journalPath, { readonly: true });
  try {
    const hasCache = db.prepare("SELECT count(*) AS n FROM sqlite_master WHERE name = 'fit_cache'").get() as { n: number };
    if (hasCache.n > 0) {
      const c = db.prepare('SELECT count(*) AS n, coalesce(sum(length(body)), 0) AS bytes FROM fit_cache').get() as { n: number; bytes: number };
      process.stdout.write(`fit cache: ${c.n} entries, ${mb(c.bytes)} of ${mb(statSync(journalPath).size)} journal\n`);
    } else {
      process.stdout.write(`no fit cache; journal ${mb(statSync(journalPath).size)}\n`);
    }
  } finally {
    db.close();
  }
  if (!values.keep) rmSync(dir, { recursive: true, force: true });
}

main().catch((e: unknown) => {
  process.stderr.write(`${e instanceof Error ? (e.stack ?? e.message) : String(e)}\n`);
  process.exit(1);
});
