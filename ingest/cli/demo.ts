/**
 * `plumbline demo` (what `npm start` runs): the invented harbour-approach event played through the
 * real paths. It writes the scenario's files, starts the service with the simulated baseline and a
 * fresh journal, replays the live runs over the WebSocket feed at an accelerated pace, and prints
 * the dashboard's address. The service keeps running after the last run (Ctrl-C stops it), unless
 * `exitWhenDone` is set.
 */
import { accessSync, constants, mkdirSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { RawTrack } from '../../engine/types.js';
import { replay } from '../service/replay.js';
import { startServer, type RunningServer } from '../service/server.js';
import type { AssessmentReport } from '../report.js';
import { combinedLines, evidenceLine } from './assess.js';
import { unzipSync } from 'fflate';
import { zipInWorker } from '../debrief/offthread.js';
import { fromService } from '../debrief/source.js';
import { writeDemoFiles } from './demo-files.js';
import { formatP, table } from './format.js';
import { terminalProgress } from './progress.js';

export interface DemoRunOptions {
  readonly dir: string;
  readonly seed: number;
  readonly sims: number;
  readonly runs: number;
  readonly speed: number;
  readonly overlap: number;
  readonly port: number;
  readonly host?: string;
  readonly staticDir?: string;
  readonly exitWhenDone?: boolean;
  readonly out?: (line: string) => void;
}

export class DemoError extends Error {
  constructor(readonly code: 'DATA_DIR_UNWRITABLE', message: string) {
    super(message);
    this.name = 'DemoError';
  }
}

/** Fly the runs lane by lane, so the three sea states of a lane come one after another. */
function flyingOrder(live: readonly RawTrack[]): RawTrack[] {
  const lane = (v: string) => v.split('-')[1] ?? v;
  return [...live].sort((a, b) => (a.track < b.track ? -1 : a.track > b.track ? 1 : 0) || lane(a.vignette).localeCompare(lane(b.vignette)) || a.vignette.localeCompare(b.vignette));
}

export function verdictTable(report: AssessmentReport): string {
  return table(
    ['vignette', 'runs', 'p(combined)', 'p(Holm)', 'verdict'],
    report.vignettes.map((v) => [v.id, String(v.runs), formatP(v.combined?.pValue), formatP(v.adjustedPValue), v.verdict]),
  );
}

export async function runDemo(options: DemoRunOptions): Promise<{ server: RunningServer; report?: AssessmentReport }> {
  const say = options.out ?? ((line: string) => process.stderr.write(`${line}\n`));
  try {
    mkdirSync(options.dir, { recursive: true });
    accessSync(options.dir, constants.W_OK);
  } catch (e) {
    throw new DemoError('DATA_DIR_UNWRITABLE', `the data folder ${options.dir} is not writable: ${e instanceof Error ? e.message : String(e)}`);
  }
  const progress = terminalProgress();
  say(`generating the demo event (seed ${options.seed}): 9 vignettes × ${options.sims} simulated runs, ${options.runs} live run(s) each`);
  const files = await writeDemoFiles(options.dir, { seed: options.seed, simsPerVignette: options.sims, liveRunsPerVignette: options.runs });
  const journalPath = join(options.dir, 'journal.sqlite');
  for (const suffix of ['', '-wal', '-shm']) rmSync(`${journalPath}${suffix}`, { force: true });
  const server = await startServer({
    planPath: files.plan,
    baselinePath: files.baseline,
    journalPath,
    host: options.host ?? '127.0.0.1',
    port: options.port,
    staticDir: options.staticDir,
    onProgress: (label, d, t) => progress.update(label, d, t),
  });
  await server.service.settle();
  progress.done();
  say(`baseline ready. Dashboard: ${server.url}/`);
  say(`replaying ${files.scenario.live.length} live runs at ${options.speed === 0 ? 'full' : `${options.speed}×`} speed, ${options.overlap} at a time`);
  const plan = JSON.parse(server.journal.getMeta('plan') as string);
  const summary = await replay({
    url: `${server.url.replace(/^http/, 'ws')}/feed`,
    plan,
    live: flyingOrder(files.scenario.live),
    speed: options.speed,
    overlap: options.overlap,
    onEvent: (line) => say(line),
  });
  await server.service.settle();
  const report = server.service.exportReport();
  say(`replayed ${summary.points} points in ${summary.tracks} runs`);
  const debrief = join(options.dir, 'debrief');
  // Built on a short-lived worker thread (as GET /api/debrief.zip is), so the charts' memory is
  // returned when it ends instead of staying in the service's heap.
  const zip = unzipSync(await zipInWorker(fromService(server.service, { kind: 'service', name: server.url }), { title: 'Demo debrief' }));
  mkdirSync(debrief, { recursive: true });
  for (const [name, bytes] of Object.entries(zip)) if (name.startsWith('debrief/') && !name.endsWith('/')) writeFileSync(join(debrief, name.slice('debrief/'.length)), bytes);
  say(`debrief package written to ${debrief}/ (report.html, results.json, runs.csv, notes.csv)`);
  say(verdictTable(report));
  if (report.combined) for (const line of combinedLines(report.combined)) say(line);
  if (report.sequential) say(evidenceLine(report.sequential));
  for (const c of report.cautions) say(`caution: ${c}`);
  if (!options.exitWhenDone) say(`the service keeps running at ${server.url}/ — press Ctrl-C to stop`);
  return { server, report };
}
