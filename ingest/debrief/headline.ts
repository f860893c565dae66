/**
 * The event's headline numbers: the event verdict with its method, and each statistic's p-values
 * combined across the completed runs, as the assessment document carries them (the rest of the
 * debrief only sees `EventHeadline`).
 */
import type { Combined } from '../../engine/combine.js';
import type { AssessmentReport } from '../report.js';

export const STATISTIC_NAMES = ['l2', 'score', 'residual'] as const;
export type StatisticName = (typeof STATISTIC_NAMES)[number];

export interface EventHeadline {
  readonly alpha: number;
  readonly method: Combined['method'];
  /** Completed (judged) runs whose p-values enter the combination. */
  readonly runs: number;
  /** The event verdict: the smallest per-statistic combined p-value, calibrated over the three. */
  readonly verdict: 'distinguishable' | 'not distinguishable' | 'not judged';
  readonly overall?: Combined;
  /** Each statistic's per-run p-values combined by the plan's method. */
  readonly perStatistic: Readonly<Record<StatisticName, Combined | undefined>>;
  /** Where the values come from, in words (shown beside the headline). */
  readonly basis: string;
}

/**
 * The headline from the document's own fields: each statistic's combined value and the event verdict
 * from their calibrated minimum (engine/combine-statistics.ts, through ingest/report.ts).
 */
export function eventHeadline(report: AssessmentReport): EventHeadline {
  const method = report.plan.combination;
  const judged = report.runs.filter((r) => r.statistics);
  const c = report.combined;
  const perStatistic = Object.fromEntries(STATISTIC_NAMES.map((s) => [s, c?.byStatistic[s]])) as Record<StatisticName, Combined | undefined>;
  return {
    alpha: report.plan.alpha,
    method,
    runs: judged.length,
    verdict: c ? (c.pValue <= report.plan.alpha ? 'distinguishable' : 'not distinguishable') : 'not judged',
    overall: c ? { method: c.method, statistic: c.statistic, pValue: c.pValue, count: c.count } : undefined,
    perStatistic,
    basis: c
      ? `${METHOD_NAMES[method]} per statistic over ${judged.length} completed run${judged.length === 1 ? '' : 's'}; the smallest of the three calibrated by ${c.draws} seeded Monte Carlo draws${c.bound ? ' (below their floor: Bonferroni)' : ''}; valid for a run count fixed in advance`
      : 'no completed run yet',
  };
}

export const METHOD_NAMES: Readonly<Record<Combined['method'], string>> = {
  fisher: "Fisher's method",
  stouffer: "Stouffer's method",
  tippett: "Tippett's method",
  cauchy: 'the Cauchy combination',
};
