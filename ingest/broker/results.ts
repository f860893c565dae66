/**
 * What monitors publish for the gatherer, and the event-level combination across shards.
 *
 * Each vignette belongs to one shard, so a vignette's combined evidence is its monitor's. The
 * event's is not: it combines every final run of every shard. `combineShards` computes it with the
 * engine's function (engine/combine-statistics.ts) over the same inputs, in the same order and with
 * the same seed label as the single process (EventService: live runs with a final judgement, in
 * the plan's vignette order then by run name; label EVENT_LABEL; per vignette the vignette id),
 * so a sharded event gives the same numbers as one process on the same data. Per-vignette verdicts
 * are Holm-adjusted over all the plan's vignettes (ingest/report.ts, `vignetteVerdicts`).
 */
import { combinedView as serviceCombinedView } from '../service/evidence-book.js';
import { combineStatistics, type StatisticsCombined } from '../../engine/combine-statistics.js';
import { EVENT_LABEL } from '../../engine/event.js';
import type { EventPlan } from '../plan.js';
import { vignetteVerdicts, type Verdict } from '../report.js';
import type { CombinedView } from '../service/view.js';

type PerStatistic<T> = { readonly l2: T; readonly score: T; readonly residual: T };

/** A run's final result as a monitor publishes it (`<prefix>.<event>.result.<vignette>.<run>`). */
export interface RunResult {
  readonly kind: 'result';
  readonly shard: string;
  /** The monitor's HTTP address (its dashboard and /api). */
  readonly monitor: string;
  readonly vignette: string;
  readonly track: string;
  /** When the run was closed (monitor clock, ms since the epoch). */
  readonly closedAt: number;
  readonly pValues: PerStatistic<number>;
  readonly overall: number;
  /** The simulated runs' own p-value triples in the run's window, as journaled by the monitor. */
  readonly nullPValues: PerStatistic<number[]>;
}

/** A monitor's announcement (`<prefix>.<event>.monitor.<shard>`). */
export interface MonitorAnnouncement {
  readonly kind: 'monitor';
  readonly shard: string;
  readonly monitor: string;
  readonly vignettes: readonly string[];
  readonly at: number;
}

export interface ShardCombination {
  readonly event?: StatisticsCombined;
  readonly vignettes: ReadonlyArray<{ id: string; combined?: StatisticsCombined; adjustedPValue?: number; verdict: Verdict }>;
}

type Plan = Pick<EventPlan, 'vignettes' | 'analysis'>;

/** The single process's order of final runs: the plan's vignette order, then run name. */
export function orderResults(plan: Plan, results: Iterable<RunResult>): RunResult[] {
  const order = new Map(plan.vignettes.map((v, i) => [v.id, i]));
  return [...results]
    .filter((r) => order.has(r.vignette))
    .sort((a, b) => (order.get(a.vignette) ?? 0) - (order.get(b.vignette) ?? 0) || (a.track < b.track ? -1 : a.track > b.track ? 1 : 0));
}

function combineRuns(plan: Plan, runs: readonly RunResult[], label: string): StatisticsCombined | undefined {
  if (runs.length === 0) return undefined;
  const a = plan.analysis;
  return combineStatistics(
    runs.map((r) => ({ pValues: r.pValues, nullPValues: r.nullPValues })),
    a.combination,
    a.seed ?? 1,
    label,
  );
}

export function combineShards(plan: Plan, results: Iterable<RunResult>): ShardCombination {
  const runs = orderResults(plan, results);
  const perVignette = plan.vignettes.map((v) => ({ id: v.id, combined: combineRuns(plan, runs.filter((r) => r.vignette === v.id), v.id) }));
  const verdicts = vignetteVerdicts(perVignette, plan.analysis.alpha);
  return {
    event: combineRuns(plan, runs, EVENT_LABEL),
    vignettes: perVignette.map((v) => ({ ...v, ...(verdicts.get(v.id) ?? { verdict: 'not judged' as const }) })),
  };
}

/** The event's combined value after each run, in closing order (the dashboard's timeline). */
export function timelineOf(plan: Plan, results: Iterable<RunResult>): Array<{ at: number; run: string; runs: number; pValue: number; byStatistic: PerStatistic<number> }> {
  const byClose = [...results].sort((a, b) => a.closedAt - b.closedAt);
  const out = [];
  for (let i = 0; i < byClose.length; i++) {
    const c = combineRuns(plan, orderResults(plan, byClose.slice(0, i + 1)), EVENT_LABEL);
    if (!c) continue;
    const b = c.byStatistic;
    out.push({ at: byClose[i].closedAt, run: `${byClose[i].vignette}/${byClose[i].track}`, runs: c.count, pValue: c.pValue, byStatistic: { l2: b.l2.pValue, score: b.score.pValue, residual: b.residual.pValue } });
  }
  return out;
}

/** The dashboard's form of a combination, worded as spanning every shard (the service's own form). */
export function combinedView(c: StatisticsCombined): CombinedView {
  return serviceCombinedView(c, ' across all shards') as CombinedView;
}
