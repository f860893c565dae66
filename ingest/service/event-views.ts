/**
 * The views of the event: what dashboards and the HTTP read endpoints are given (./view.ts) and the
 * exported report (../report.ts), all computed from the shared state, the evidence book and the
 * log. Nothing here changes state (the evidence book memoises its combinations).
 */
import { EVENT_LABEL } from '../../engine/event.js';
import { assembleReport, CAUTIONS, vignetteVerdicts, type AssessmentReport, type RunReport } from '../report.js';
import type { ReadReport } from '../tracks-reader.js';
import { logView, type EventLog } from './event-log.js';
import type { EventCore, VignetteState } from './event-state.js';
import { combinedView, EVIDENCE_NOTE, type EvidenceBook } from './evidence-book.js';
import { keyOf, rawTrack } from './tracks.js';
import { envelopeView, type EventView, type JournalStatusView, type RunDetail, type RunView, type VignetteView } from './view.js';

export interface ViewSources {
  readonly core: EventCore;
  readonly book: EvidenceBook;
  readonly log: EventLog;
  journalStatus(): JournalStatusView;
  /** What the baseline file's reader reported, when there was one. */
  baselineRead(): ReadReport | undefined;
}

export function runView(s: ViewSources, key: string): RunView | undefined {
  const t = s.core.tracks.get(key);
  if (!t) return undefined;
  return {
    key: t.key,
    vignette: t.vignette,
    track: t.track,
    source: t.source,
    status: t.closedAt === undefined ? 'in-flight' : 'complete',
    points: t.points.size,
    lastT: t.maxT,
    openedAt: t.openedAt,
    closedAt: t.closedAt,
    judgement: t.judgement,
    notJudged: t.notJudged,
    flags: t.flags,
    notes: t.notes,
  };
}

export function vignetteView(s: ViewSources, id: string): VignetteView | undefined {
  const { plan } = s.core;
  const v = s.core.vignettes.get(id);
  const pv = plan.vignettes.find((x) => x.id === id);
  if (!v || !pv) return undefined;
  const tracks = s.book.finalTracks();
  const verdict = vignetteVerdicts(
    plan.vignettes.map((x) => ({ id: x.id, combined: s.book.combine(tracks.filter((t) => t.vignette === x.id), x.id) })),
    plan.analysis.alpha,
  ).get(id);
  return {
    id,
    label: pv.label,
    horizon: pv.horizon,
    condition: pv.condition,
    baseline: { status: v.status, sims: v.sims, components: v.summary?.components, varianceExplained: v.summary?.varianceExplained, reason: v.reason },
    combined: combinedView(s.book.combine(tracks.filter((t) => t.vignette === id), id)),
    evidence: s.book.evidence?.streams.find((x) => x.vignette === id && x.runs > 0),
    adjustedPValue: verdict?.adjustedPValue,
    verdict: verdict?.verdict ?? 'not judged',
  };
}

export function combinedEventView(s: ViewSources): EventView['combined'] {
  const { plan } = s.core;
  const c = combinedView(s.book.combine(s.book.finalTracks(), EVENT_LABEL));
  return c ? { ...c, alpha: plan.analysis.alpha, distinguishable: c.pValue <= plan.analysis.alpha } : undefined;
}

export function snapshot(s: ViewSources): EventView {
  const { plan } = s.core;
  const evidence = s.book.evidence;
  return {
    plan: { name: plan.name, alpha: plan.analysis.alpha, combination: plan.analysis.combination, channels: plan.channels.map((c) => ({ name: c.name, unit: c.unit })) },
    vignettes: plan.vignettes.map((v) => vignetteView(s, v.id) as VignetteView),
    runs: [...s.core.tracks.values()].filter((t) => t.source === 'live').map((t) => runView(s, t.key) as RunView),
    combined: combinedEventView(s),
    timeline: s.book.timeline.map((p, i) => ({ ...p, evidence: evidence?.event.martingale[i] })),
    evidence: evidence ? { ...evidence, note: EVIDENCE_NOTE } : undefined,
    log: s.log.recent(),
    cautions: [...CAUTIONS],
    journal: s.journalStatus(),
  };
}

export function detail(s: ViewSources, vignette: string, track: string): RunDetail | undefined {
  const { plan } = s.core;
  const t = s.core.tracks.get(keyOf(vignette, track));
  const run = runView(s, keyOf(vignette, track));
  if (!t || !run) return undefined;
  // Circular channels unwrapped, as the smoothed curve and the envelope are.
  const raw = rawTrack(plan, t);
  const v = s.core.vignettes.get(vignette);
  return {
    run,
    channels: plan.channels.map((c) => ({ name: c.name, unit: c.unit })),
    raw: { t: Array.from(raw.t), values: raw.values.map((x) => Array.from(x)) },
    grid: v?.grid,
    smoothed: t.detail?.smoothed,
    judged: t.detail?.judged,
    texture: v?.texture,
    envelope: v?.envelope ? envelopeView(v.envelope) : undefined,
    projection: t.closedAt === undefined ? t.detail?.projection : undefined,
    scores: t.detail?.scores ? { ...t.detail.scores, trail: t.trail } : undefined,
    reference: t.detail?.reference,
    log: s.log.kept().filter((e) => e.vignette === vignette && (e.track === undefined || e.track === track)),
  };
}

export function exportReport(s: ViewSources): AssessmentReport {
  const { plan } = s.core;
  const tracks = s.book.finalTracks();
  const reports = tracks.map((t) => t.report as RunReport);
  const vignettes = plan.vignettes.map((pv) => {
    const v = s.core.vignettes.get(pv.id) as VignetteState;
    return { id: pv.id, horizon: pv.horizon, summary: v.summary, error: v.reason, combined: s.book.combine(tracks.filter((t) => t.vignette === pv.id), pv.id) };
  });
  const e = s.book.evidence;
  const sequential = e
    ? {
        threshold: e.threshold,
        evidence: e.event.current,
        established: e.event.established,
        crossedAt: e.event.crossedAt,
        statistics: { l2: e.event.statistics.l2.current, score: e.event.statistics.score.current, residual: e.event.statistics.residual.current },
        vignettes: e.streams.filter((x) => x.runs > 0).map((x) => ({ id: x.vignette, evidence: x.current, established: x.established, runs: x.runs, advice: x.advice.message })),
        advice: e.eventAdvice.message,
        note: EVIDENCE_NOTE,
      }
    : undefined;
  const log = s.core.journal.log().map((j) => {
    const x = logView(j);
    return { at: x.at, kind: x.kind, vignette: x.vignette, track: x.track, t: x.t, text: x.text, author: x.author };
  });
  return assembleReport(plan, vignettes, reports, s.book.combine(tracks, EVENT_LABEL), { baseline: s.baselineRead() }, { sequential, log });
}
