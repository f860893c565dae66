/**
 * The event's headline numbers: the event verdict with its method, and each statistic's p-values
 * combined across the completed runs. Kept in one function so that, once the assessment document
 * carries its own per-statistic combined values and event verdict, the debrief reads them here
 * instead of combining (the rest of the debrief only sees `EventHeadline`).
 */
import { combinePValues, type Combined } from '../../engine/combine.js';
import type { AssessmentReport } from '../report.js';

export const STATISTIC_NAMES = ['l2', 'score', 'residual'] as const;
export type StatisticName = (typeof STATISTIC_NAMES)[number];

export interface EventHeadline {
  readonly alpha: number;
  readonly method: Combined['method'];
  /** Completed (judged) runs whose p-values enter the combination. */
  readonly runs: number;
  /** The event verdict: the combination of the runs' overall (calibrated minimum) p-values. */
  readonly verdict: 'distinguishable' | 'not distinguishable' | 'not judged';
  readonly overall?: Combined;
  /** Each statistic's per-run p-values combined by the plan's method. */
  readonly perStatistic: Readonly<Record<StatisticName, Combined | undefined>>;
  /** Where the values come from, in words (shown beside the headline). */
  readonly basis: string;
}

/**
 * Per-statistic combined values from the per-run p-values (engine/combine.ts, the plan's method),
 * and the event verdict from the document's combined overall p-value.
 */
export function eventHeadline(report: AssessmentReport): EventHeadline {
  const method = report.plan.combination;
  const judged = report.runs.filter((r) => r.statistics);
  const perStatistic = Object.fromEntries(
    STATISTIC_NAMES.map((s) => {
      const p = judged.map((r) => r.statistics?.[s].pValue as number);
      return [s, p.length > 0 ? combinePValues(p, method) : undefined];
    }),
  ) as Record<StatisticName, Combined | undefined>;
  const c = report.combined;
  return {
    alpha: report.plan.alpha,
    method,
    runs: judged.length,
    verdict: c ? (c.pValue <= report.plan.alpha ? 'distinguishable' : 'not distinguishable') : 'not judged',
    overall: c ? { method: c.method, statistic: c.statistic, pValue: c.pValue, count: c.count } : undefined,
    perStatistic,
    basis: `${METHOD_NAMES[method]} over the ${judged.length} completed run${judged.length === 1 ? '' : 's'}, valid for a number of runs fixed in advance; each statistic combined from its per-run p-values`,
  };
}

export const METHOD_NAMES: Readonly<Record<Combined['method'], string>> = {
  fisher: "Fisher's method",
  stouffer: "Stouffer's method",
  tippett: "Tippett's method",
  cauchy: 'the Cauchy combination',
};
