/**
 * Commit: the points staged in one batch go to the journal in one transaction; only then do they
 * enter their tracks' columns, and each message is acknowledged with its track's contiguous
 * committed sequence. A journal that refuses the write (disk full, read-only) puts the service in
 * the journal-fault state: every message of the batch is refused with `JOURNAL_UNAVAILABLE`, its
 * staged points are dropped, and the first commit that succeeds again clears the fault with a
 * line in the event log.
 */
import type { EventLog } from './event-log.js';
import type { EventCore } from './event-state.js';
import { journalWriteFailure, type JournalPoint } from './journal.js';
import { errorReply, type CloseMessage, type ServerReply } from './protocol.js';
import { advanceCommitted, type StagedPoint, type TrackState } from './tracks.js';
import type { JournalStatusView } from './view.js';

export interface StagedClose {
  readonly msg: CloseMessage;
  readonly reply: (r: ServerReply) => void;
}

export interface StagedAck {
  readonly track: TrackState;
  readonly msgId: string;
  readonly staged: StagedPoint[];
  readonly duplicates: number;
  readonly reply: (r: ServerReply) => void;
}

/** The journal's fault state: set by a refused write, cleared by the next successful commit. */
export class JournalFaults {
  private fault?: { reason: string; since: number };

  constructor(
    private readonly core: Pick<EventCore, 'clock' | 'changes$'>,
    private readonly log: EventLog,
  ) {}

  /** Record a journal write failure (returns its description), or undefined when `e` is not one. */
  failed(e: unknown): string | undefined {
    const failure = journalWriteFailure(e);
    if (failure && !this.fault) {
      this.fault = { reason: failure, since: this.core.clock() };
      this.core.changes$.next({ kind: 'journal' });
    }
    return failure;
  }

  recovered(): void {
    if (!this.fault) return;
    const was = this.fault;
    this.fault = undefined;
    this.core.changes$.next({ kind: 'journal' });
    try {
      this.log.append('event', null, null, null, { text: `journal writable again after ${((this.core.clock() - was.since) / 1000).toFixed(1)} s (${was.reason}); data refused meanwhile must be sent again` });
    } catch {
      // failed again: the next commit reports it
    }
  }

  status(): JournalStatusView {
    return this.fault ? { writable: false, reason: this.fault.reason, since: this.fault.since } : { writable: true };
  }
}

/**
 * Commit a batch: one journal transaction, then the points into their tracks, `committed(b)` for
 * each message (the quality monitor), then the acks. Returns the tracks touched, or undefined when
 * the journal refused: then every message and every staged close has been answered with the error.
 */
export function commitBatch(core: EventCore, faults: JournalFaults, batch: readonly StagedAck[], closes: readonly StagedClose[], committed: (b: StagedAck) => void): Set<TrackState> | undefined {
  const all: JournalPoint[] = [];
  for (const b of batch) for (const p of b.staged) all.push(p);
  try {
    core.journal.commitPoints(all);
  } catch (e) {
    const failure = faults.failed(e);
    for (const b of batch) {
      for (const p of b.staged) {
        b.track.pending.delete(p.seq);
        b.track.pendingTimes.delete(p.t);
      }
      b.track.maxT = b.track.points.maxT;
      b.reply(
        failure
          ? errorReply('JOURNAL_UNAVAILABLE', `${failure}; these points were not committed: send them again once the journal recovers`, b.msgId)
          : errorReply('INTERNAL', `the journal could not commit: ${e instanceof Error ? e.message : String(e)}`, b.msgId),
      );
    }
    for (const c of closes) c.reply(errorReply(failure ? 'JOURNAL_UNAVAILABLE' : 'INTERNAL', `${failure ?? 'the journal could not commit'}; the track was not closed: send close again`, c.msg.id));
    return undefined;
  }
  faults.recovered();
  const touched = new Set<TrackState>();
  for (const b of batch) {
    for (const p of b.staged) {
      b.track.pending.delete(p.seq);
      b.track.pendingTimes.delete(p.t);
      b.track.points.set(p.seq, p);
      b.track.times.add(p.t);
    }
    advanceCommitted(b.track);
    committed(b);
    touched.add(b.track);
  }
  for (const b of batch) {
    b.reply({ v: 1, type: 'ack', id: b.msgId, vignette: b.track.vignette, track: b.track.track, committedSeq: b.track.committedSeq, accepted: b.staged.length, duplicates: b.duplicates });
  }
  return touched;
}
