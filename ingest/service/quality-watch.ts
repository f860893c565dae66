/**
 * A live run's data-quality monitor (engine/quality.ts) fed with committed points in arrival order;
 * a flag it raises is kept on the run, written to the event log and announced.
 */
import { closeTrack as closeQuality, observePoint, type QualityFlag, type QualityPoint } from '../../engine/quality.js';
import type { EventLog } from './event-log.js';
import type { EventCore } from './event-state.js';
import type { TrackState } from './tracks.js';

/** Feed committed points to the run's quality monitor; `announce` journals and shows new flags. */
export function observeQuality(core: EventCore, log: EventLog, t: TrackState, points: ReadonlyArray<{ readonly seq: number; readonly t: number; readonly values: Float64Array }>, announce: boolean): void {
  if (!t.quality) return;
  for (const p of points) {
    // The monitor only reads `values` by index (engine/quality.ts): the point's own array serves.
    const r = observePoint(t.quality, p as unknown as QualityPoint);
    t.quality = r.state;
    if (announce) for (const f of r.flags) raiseFlag(core, log, t, f);
  }
}

/** The monitor's end-of-run flags (gaps up to the horizon, ...), raised when the run closes. */
export function closeQualityWatch(core: EventCore, log: EventLog, t: TrackState): void {
  if (!t.quality) return;
  const horizon = core.plan.vignettes.find((v) => v.id === t.vignette)?.horizon ?? t.maxT;
  for (const f of closeQuality(t.quality, horizon)) raiseFlag(core, log, t, f);
}

function raiseFlag(core: EventCore, log: EventLog, t: TrackState, f: QualityFlag): void {
  if (!t.flags.includes(f.kind)) t.flags.push(f.kind);
  log.append('flag', t.vignette, t.track, f.t, { text: `${f.kind}${f.channelName ? ` (${f.channelName})` : ''}: ${f.detail}` });
  core.changes$.next({ kind: 'run', key: t.key });
}
