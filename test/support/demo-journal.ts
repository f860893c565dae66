/**
 * A small demo event played through the real service into a journal: the invented harbour-approach
 * scenario (seed 7, 40 simulated runs per vignette, two live runs per vignette, 18 runs), replayed
 * over the WebSocket feed at full speed, plus analysts' notes whose text carries markup and a
 * spreadsheet formula. The server is left running for the caller (its export is the reference).
 */
import { join } from 'node:path';
import type { RawTrack } from '../../engine/types.js';
import { writeDemoFiles } from '../../ingest/cli/demo-files.js';
import { loadPlan, type EventPlan } from '../../ingest/plan.js';
import { replay } from '../../ingest/service/replay.js';
import { startServer, type RunningServer } from '../../ingest/service/server.js';
import { readTracks } from '../../ingest/tracks-reader.js';

export const MARKUP_NOTE = 'radar <b>dropout</b> <script>window.__x=1</script> "quoted", and a comma';
export const MARKUP_AUTHOR = 'analyst <i>A</i>';
export const FORMULA_NOTE = '=2+3 typed into the note box';

export interface DemoJournal {
  readonly dir: string;
  readonly journal: string;
  readonly files: Awaited<ReturnType<typeof writeDemoFiles>>;
  readonly plan: EventPlan;
  readonly live: RawTrack[];
  readonly server: RunningServer;
}

export async function makeDemoJournal(dir: string): Promise<DemoJournal> {
  const files = await writeDemoFiles(join(dir, 'demo'), { seed: 7, simsPerVignette: 40, liveRunsPerVignette: 2 });
  const journal = join(dir, 'journal.sqlite');
  const server = await startServer({ planPath: files.plan, baselinePath: files.baseline, journalPath: journal, port: 0, inProcessCompute: true });
  await server.service.settle();
  const plan = await loadPlan(files.plan);
  const live = (await readTracks(files.live, plan)).tracks;
  await replay({ url: `${server.url.replace(/^http/, 'ws')}/feed`, plan, live, speed: 0, overlap: 3 });
  await server.service.settle();
  const note = (id: string, text: string, author: string, vignette?: string, track?: string, t?: number) =>
    server.service.receive('watcher', { v: 1, type: 'note', id, text, author, vignette, track, t }, () => undefined);
  note('n1', MARKUP_NOTE, MARKUP_AUTHOR, 'S1-L2', 'live-1', 120);
  note('n2', FORMULA_NOTE, 'range safety', 'S3-L1', 'live-2', 200);
  note('n3', 'weather briefing: wind 12 kn from the west', 'test director');
  return { dir, journal, files, plan, live, server };
}
