/**
 * `plumbline report`: the debrief package (ingest/debrief/) into a folder, from a journal file
 * (`--journal`, read without being changed), a running service (`--url`) or an assessment document
 * (`--in`). Writes report.html, results.json, runs.csv and notes.csv.
 */
import { buildPackage, writePackage } from '../debrief/package.js';
import { fromDocument, fromJournal, fromUrl, type DebriefInput } from '../debrief/source.js';

export interface ReportOptions {
  readonly journal?: string;
  readonly url?: string;
  readonly in?: string;
  readonly baseline?: string;
  readonly out: string;
  readonly title?: string;
  readonly onProgress?: (label: string, done: number, total: number) => void;
}

/** Exactly one source must be given; returns the message for a usage error otherwise. */
export function sourceProblem(o: Pick<ReportOptions, 'journal' | 'url' | 'in'>): string | undefined {
  const given = [o.journal, o.url, o.in].filter((x) => x !== undefined).length;
  if (given === 0) return 'report: give --journal FILE, --url http://HOST:PORT or --in FILE';
  if (given > 1) return 'report: give only one of --journal, --url and --in';
  return undefined;
}

export async function debriefInput(o: ReportOptions): Promise<DebriefInput> {
  if (o.journal !== undefined) return fromJournal(o.journal, { baselinePath: o.baseline, onProgress: o.onProgress });
  if (o.url !== undefined) return fromUrl(o.url);
  return fromDocument(o.in as string);
}

/** Make and write the package; returns the paths written. */
export async function writeDebrief(o: ReportOptions): Promise<string[]> {
  const input = await debriefInput(o);
  return writePackage(o.out, buildPackage(input, { title: o.title }));
}
