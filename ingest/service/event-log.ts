/**
 * The event log: every entry (events, notes, quality flags) is written to the journal first, then
 * kept in memory (bounded by `logEntries`) and announced on `changes$`. A restart pushes the
 * journal's entries back without announcing them.
 */
import type { Subject } from 'rxjs';
import type { Change } from './event-state.js';
import type { Journal, JournalLogEntry } from './journal.js';
import type { ServiceLimits } from './limits.js';
import type { LogEntryView } from './view.js';

export class EventLog {
  private readonly entries: LogEntryView[] = [];

  constructor(
    private readonly journal: Journal,
    private readonly clock: () => number,
    private readonly limits: ServiceLimits,
    private readonly changes$: Subject<Change>,
  ) {}

  /** Journal an entry, keep it and announce it. Throws what the journal throws. */
  append(kind: LogEntryView['kind'], vignette: string | null, track: string | null, t: number | null, body: { text: string; author?: string }): LogEntryView {
    const at = this.clock();
    const id = this.journal.appendLog(at, kind, vignette, track, t, body);
    const entry: LogEntryView = { id, at, kind, vignette: vignette ?? undefined, track: track ?? undefined, t: t ?? undefined, text: body.text, author: body.author };
    this.push(entry, true);
    return entry;
  }

  push(entry: LogEntryView, announce: boolean): void {
    this.entries.push(entry);
    if (this.entries.length > 4 * this.limits.logEntries) this.entries.splice(0, this.entries.length - this.limits.logEntries);
    if (announce) this.changes$.next({ kind: 'log', entry });
  }

  /** The entries kept in memory, oldest first. */
  kept(): readonly LogEntryView[] {
    return this.entries;
  }

  /** The newest `logEntries` entries (a dashboard's snapshot). */
  recent(): LogEntryView[] {
    return this.entries.slice(-this.limits.logEntries);
  }
}

/** A journal log row as the views show it. */
export function logView(e: JournalLogEntry): LogEntryView {
  const body = e.body as { text?: string; author?: string };
  return { id: e.id, at: e.at, kind: e.kind as LogEntryView['kind'], vignette: e.vignette ?? undefined, track: e.track ?? undefined, t: e.t ?? undefined, text: body.text ?? '', author: body.author };
}
