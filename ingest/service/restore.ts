/**
 * Restore: rebuild the event from the journal at start (tracks, points, results, log), then refit
 * every vignette with simulated tracks and judge the live runs closed but never judged. Closed
 * simulated tracks are read from their packs (./fit-cache.ts, one row per track) when a valid one
 * exists, else point by point (and packed for the next start); the service keeps none of their
 * points, as after a close. `note` gets a line for every pack found damaged or not written.
 */
import type { RawTrack } from '../../engine/types.js';
import { logView, type EventLog } from './event-log.js';
import type { EventCore } from './event-state.js';
import type { EvidenceBook } from './evidence-book.js';
import { packTrack, unpackTrack } from './fit-cache.js';
import { journalWriteFailure, type SimPack } from './journal.js';
import type { Judging } from './judging.js';
import { observeQuality } from './quality-watch.js';
import { advanceCommitted, keyOf, newTrack, rawTrack, type StoredResult, type TrackState } from './tracks.js';

export async function restoreEvent(
  core: EventCore,
  stages: { readonly book: EvidenceBook; readonly log: EventLog; readonly judging: Judging },
  onProgress?: (label: string, done: number, total: number) => void,
  note: (line: string) => void = () => undefined,
): Promise<{ tracks: number; points: number }> {
  const { plan, journal, tracks } = core;
  const { book, log, judging } = stages;
  const rows = journal.tracks();
  const byId = new Map<number, TrackState>();
  for (const r of rows) {
    const order = r.channels.map((c) => plan.channels.findIndex((p) => p.name === c));
    const t = newTrack(plan, core.limits, r.id, r.vignette, r.track, r.source, order, r.openedAt);
    if (r.closedAt !== null) {
      t.closedAt = r.closedAt;
      t.lastSeq = r.lastSeq ?? 0;
    }
    tracks.set(t.key, t);
    byId.set(r.id, t);
  }
  let points = 0;
  const packed = new Map<number, RawTrack>();
  const packs = journal.simPacks();
  for (const t of byId.values()) {
    const p = packs.get(t.id);
    if (!p || t.source !== 'sim' || t.closedAt === undefined || p.lastSeq !== t.lastSeq) continue;
    const raw = unpackTrack(p, t.vignette, t.track, plan.channels.length);
    if (typeof raw === 'string') {
      note(`${raw}; reading its points`);
      continue;
    }
    packed.set(t.id, raw);
    t.committedSeq = p.committedSeq;
    t.maxT = raw.t[raw.t.length - 1] ?? 0;
    points += p.n;
  }
  journal.eachPoint((p) => {
    const t = byId.get(p.trackId);
    if (!t) return;
    t.points.set(p.seq, { seq: p.seq, t: p.t, values: p.values });
    t.times.add(p.t);
    if (p.t > t.maxT) t.maxT = p.t;
    points++;
  }, new Set(packed.keys()));
  for (const t of tracks.values()) {
    if (!packed.has(t.id)) advanceCommitted(t);
    if (t.quality && t.closedAt === undefined) observeQuality(core, log, t, [...t.points.values()].sort((a, b) => a.seq - b.seq), false);
  }
  // Closed simulated tracks go to the worker (the service keeps only their count); those read
  // point by point are packed for the next start.
  const simsBy = new Map<string, RawTrack[]>();
  const fresh: SimPack[] = [];
  for (const t of tracks.values()) {
    if (t.source !== 'sim' || t.closedAt === undefined) continue;
    let raw = packed.get(t.id);
    if (!raw) {
      raw = rawTrack(plan, t);
      fresh.push(packTrack(t.id, t.lastSeq ?? 0, t.committedSeq, raw));
      t.points.clear();
      t.times.clear();
    }
    const list = simsBy.get(t.vignette);
    if (list) list.push(raw);
    else simsBy.set(t.vignette, [raw]);
  }
  packed.clear();
  try {
    journal.saveSimPacks(fresh);
  } catch (e) {
    note(`simulated tracks not packed: ${journalWriteFailure(e) ?? (e instanceof Error ? e.message : String(e))}; the next start reads their points`);
  }
  const results = journal.results();
  for (const t of tracks.values()) {
    const stored = results.get(t.id) as StoredResult | undefined;
    if (stored) {
      t.judgement = stored.judgement;
      t.report = stored.report;
      t.nullPValues = stored.nullPValues;
      t.detail = stored.detail;
      t.trail = stored.trail;
      t.notJudged = stored.notJudged;
    }
  }
  const judged = [...tracks.values()].filter((t) => t.source === 'live' && t.report?.overall && t.closedAt !== undefined).sort((a, b) => (a.closedAt as number) - (b.closedAt as number) || a.id - b.id);
  for (const t of judged) book.addTimelinePoint(t, t.closedAt as number);
  for (const e of journal.log()) {
    const entry = logView(e);
    log.push(entry, false);
    const t = entry.vignette && entry.track ? tracks.get(keyOf(entry.vignette, entry.track)) : undefined;
    const kind = entry.kind === 'flag' ? entry.text.split(/[ :(]/)[0] : undefined;
    if (t && kind && !t.flags.includes(kind)) t.flags.push(kind);
  }
  for (const t of tracks.values()) if (t.source === 'live') t.notes = log.kept().filter((e) => e.kind === 'note' && e.vignette === t.vignette && e.track === t.track).length;
  for (const [id, list] of simsBy) {
    const v = core.vignettes.get(id);
    if (v) v.sims = await core.assessor.addSims(id, list);
  }
  // Every vignette with simulated tracks (from the journal or a baseline file) is fitted once.
  const withSims = [...core.vignettes.values()].filter((v) => v.sims > 0);
  let fitted = 0;
  await Promise.all(
    withSims.map((v) =>
      judging.refit(v.id).then(() => {
        fitted++;
        onProgress?.('fitting baselines', fitted, withSims.length);
      }),
    ),
  );
  judging.refreshEvidence();
  // Live runs closed but never judged (a stop between close and result) are judged now.
  for (const t of tracks.values()) {
    if (t.source === 'live' && t.closedAt !== undefined && !t.report) judging.judgeFinal(t);
  }
  return { tracks: rows.length, points };
}
