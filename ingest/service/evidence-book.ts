/**
 * The event's evidence across runs: each statistic combined over the judged live runs (memoised
 * between two final judgements), the order in which final judgements arrived, the timeline of the
 * combined p-value, and the latest sequential evidence (a test martingale computed by the worker).
 * Judging (./judging.ts) adds to it; the views (./event-views.ts) read it.
 */
import { combineStatistics, type StatisticsCombined } from '../../engine/combine-statistics.js';
import { EVENT_LABEL } from '../../engine/event.js';
import type { EvidenceResult } from './compute.js';
import type { EventCore } from './event-state.js';
import type { TrackState } from './tracks.js';
import type { CombinedView, TimelinePoint } from './view.js';

export const EVIDENCE_NOTE =
  'anytime-valid: the evidence (a test martingale) may be read after every run and runs may be added at will; reaching 1/alpha establishes a discrepancy with false-alarm probability at most alpha (Ville). The shared baseline makes runs of one vignette slightly dependent, so the bound is approximate.';

/** One final run's p-values as the sequential evidence takes them. */
export interface EvidenceRun {
  readonly stream: string;
  readonly p: number;
  readonly l2: number;
  readonly score: number;
  readonly residual: number;
}

export class EvidenceBook {
  /** Combinations computed since the last final judgement, by family and runs (see `combine`). */
  private readonly combinations = new Map<string, StatisticsCombined | undefined>();
  /** Judged live runs in the order their final judgement arrived (journal order on restore). */
  private readonly completionOrder: TrackState[] = [];
  readonly timeline: TimelinePoint[] = [];
  evidence?: EvidenceResult;

  constructor(private readonly core: Pick<EventCore, 'plan' | 'tracks'>) {}

  /** A run's final judgement changed the runs to combine: forget the memoised combinations. */
  forgetCombinations(): void {
    this.combinations.clear();
  }

  /** A final judgement arrived (at `at`): the run joins the completion order and the timeline. */
  addTimelinePoint(t: TrackState, at: number): void {
    if (!t.report?.overall) return;
    this.completionOrder.push(t);
    const combined = this.combine(this.finalTracks().filter((x) => this.completionOrder.includes(x)), EVENT_LABEL);
    if (combined) {
      const b = combined.byStatistic;
      this.timeline.push({ at, run: t.key, runs: combined.count, pValue: combined.pValue, byStatistic: { l2: b.l2.pValue, score: b.score.pValue, residual: b.residual.pValue } });
    }
  }

  /** Every final run's p-values (per statistic and overall), in completion order. */
  evidenceRuns(): EvidenceRun[] {
    return this.completionOrder.flatMap((t) => {
      const r = t.report;
      if (!r?.overall || !r.statistics) return [];
      return [{ stream: t.vignette, p: r.overall.pValue, l2: r.statistics.l2.pValue, score: r.statistics.score.pValue, residual: r.statistics.residual.pValue }];
    });
  }

  /** Live runs with a final judgement in the batch order (plan vignette order, then track id). */
  finalTracks(): TrackState[] {
    const order = new Map(this.core.plan.vignettes.map((v, i) => [v.id, i]));
    return [...this.core.tracks.values()]
      .filter((t) => t.source === 'live' && t.report)
      .sort((a, b) => (order.get(a.vignette) ?? 0) - (order.get(b.vignette) ?? 0) || (a.track < b.track ? -1 : a.track > b.track ? 1 : 0));
  }

  /**
   * Each statistic combined across the judged runs and their calibrated minimum, as the batch path
   * computes it (engine/combine-statistics.ts); `label` is the family's name in the draws' seed.
   */
  combine(tracks: readonly TrackState[], label: string): StatisticsCombined | undefined {
    // Views ask for the same combinations many times between two final judgements: keep them.
    const key = `${label}\u0000${tracks.map((t) => t.key).join('\u0001')}`;
    if (this.combinations.has(key)) return this.combinations.get(key);
    const runs = tracks.flatMap((t) => {
      const st = t.report?.statistics;
      if (!st || !t.nullPValues) return [];
      return [{ pValues: { l2: st.l2.pValue, score: st.score.pValue, residual: st.residual.pValue }, nullPValues: t.nullPValues }];
    });
    const a = this.core.plan.analysis;
    const out = runs.length > 0 ? combineStatistics(runs, a.combination, a.seed ?? 1, label) : undefined;
    if (this.combinations.size > 1000) this.combinations.clear();
    this.combinations.set(key, out);
    return out;
  }
}

/** The dashboard's form of a combination; `scope` words what it spans in the note (e.g. " across all shards"). */
export function combinedView(c: StatisticsCombined | undefined, scope = ''): CombinedView | undefined {
  return c
    ? {
        method: c.method,
        statistic: c.statistic,
        pValue: c.pValue,
        count: c.count,
        byStatistic: { l2: c.byStatistic.l2.pValue, score: c.byStatistic.score.pValue, residual: c.byStatistic.residual.pValue },
        leading: c.leading,
        note: `fixed-sample ${c.method} combination of each statistic${scope}, the smallest of the three calibrated by ${c.draws} Monte Carlo draws (seeded): valid only for a number of runs fixed in advance`,
      }
    : undefined;
}
