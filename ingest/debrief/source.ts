/**
 * Where a debrief comes from: a journal file, a running service (its HTTP endpoints) or an
 * assessment document. Each gives the same shape: the assessment document (the numbers), and when
 * the event itself is at hand, its state (runs in flight, evidence after each run) and each run's
 * detail (envelope, smoothed track, score trail, simulated statistics) for the charts.
 *
 * A journal is read without being changed: a private in-memory copy is rebuilt by the same code the
 * service runs on a restart (`openEvent`, `EventService.restore`), so no statistic is recomputed
 * here that the service would not compute the same way.
 */
import { readFileSync } from 'node:fs';
import { basename } from 'node:path';
import { assessmentReportSchema, type AssessmentReport } from '../report.js';
import type { EventService } from '../service/event-service.js';
import { Journal } from '../service/journal.js';
import { DEFAULT_LIMITS } from '../service/limits.js';
import { openEvent, ServeError } from '../service/server.js';
import type { EventView, RunDetail } from '../service/view.js';
import { runKey } from './keys.js';

export { runKey };

/** A debrief that cannot be made from what was given (exit 2 from the command). */
export class DebriefError extends Error {
  constructor(readonly code: 'UNREACHABLE' | 'UNREADABLE' | 'NOT_AN_ASSESSMENT', message: string) {
    super(message);
    this.name = 'DebriefError';
  }
}

export interface DebriefSource {
  readonly kind: 'journal' | 'service' | 'document';
  /** The file name or address it came from (shown in the report). */
  readonly name: string;
}

export interface DebriefInput {
  readonly source: DebriefSource;
  readonly report: AssessmentReport;
  /** The event's state (absent for a document). */
  readonly state?: EventView;
  /** Each judged run's detail by `vignette/track` (absent for a document). */
  readonly details: ReadonlyMap<string, RunDetail>;
}


/** The debrief input of a live service (the dashboard's download). */
export function fromService(service: EventService, source: DebriefSource): DebriefInput {
  const report = service.exportReport();
  const details = new Map<string, RunDetail>();
  for (const r of report.runs) {
    const d = service.detail(r.vignette, r.track);
    if (d) details.set(runKey(r.vignette, r.track), d);
  }
  return { source, report, state: service.snapshot(), details };
}

/**
 * The debrief input of a journal file. The baseline comes from `baselinePath` or the file the
 * journal recorded; without either, the report has no envelopes (and says so).
 */
export async function fromJournal(path: string, options: { baselinePath?: string; onProgress?: (label: string, done: number, total: number) => void } = {}): Promise<DebriefInput> {
  const journal = Journal.snapshot(path);
  try {
    const opened = await openEvent(journal, { journalPath: path, baselinePath: options.baselinePath, limits: DEFAULT_LIMITS, inProcessCompute: true, onProgress: options.onProgress }).catch((e: unknown) => {
      if (e instanceof ServeError && /baseline file/.test(e.message)) throw new DebriefError('UNREADABLE', `${e.message}: give its new place with --baseline FILE`);
      throw e;
    });
    const { service, assessor } = opened;
    try {
      await service.settle(600_000);
      return fromService(service, { kind: 'journal', name: basename(path) });
    } finally {
      service.shutdown();
      await assessor.close();
    }
  } finally {
    journal.close();
  }
}

async function getJson(url: string): Promise<unknown> {
  let res: Response;
  try {
    res = await fetch(url);
  } catch (e) {
    throw new DebriefError('UNREACHABLE', `cannot reach ${url}: ${e instanceof Error ? e.message : String(e)}`);
  }
  if (!res.ok) throw new DebriefError('UNREACHABLE', `${url} answered ${res.status}`);
  return res.json();
}

function parseDocument(doc: unknown, where: string): AssessmentReport {
  const parsed = assessmentReportSchema.safeParse(doc);
  if (!parsed.success) {
    throw new DebriefError('NOT_AN_ASSESSMENT', `${where}: not an assessment document: ${parsed.error.issues.slice(0, 3).map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}`);
  }
  return parsed.data;
}

/** The debrief input of a running service, through its read endpoints. */
export async function fromUrl(base: string): Promise<DebriefInput> {
  const root = base.replace(/\/+$/, '');
  const report = parseDocument(await getJson(`${root}/api/export`), `${root}/api/export`);
  const state = (await getJson(`${root}/api/state`)) as EventView;
  const details = new Map<string, RunDetail>();
  for (const r of report.runs) {
    const d = (await getJson(`${root}/api/runs/${encodeURIComponent(r.vignette)}/${encodeURIComponent(r.track)}`)) as RunDetail;
    details.set(runKey(r.vignette, r.track), d);
  }
  return { source: { kind: 'service', name: root }, report, state, details };
}

/** The debrief input of an assessment document (`plumbline assess --out`, or a saved export). */
export function fromDocument(path: string): DebriefInput {
  let doc: unknown;
  try {
    doc = JSON.parse(readFileSync(path, 'utf8'));
  } catch (e) {
    throw new DebriefError('UNREADABLE', `cannot read ${path}: ${e instanceof Error ? e.message : String(e)}`);
  }
  return { source: { kind: 'document', name: basename(path) }, report: parseDocument(doc, path), details: new Map() };
}
