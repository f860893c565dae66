/**
 * The fixed-sample comparison: Fisher's combination of the same runs (./../combine.ts),
 * −2 Σ ln p_i ~ χ²_{2n} under the null (Fisher, "Statistical Methods for Research Workers", 4th ed.,
 * Oliver & Boyd 1932, §21.1). Exact when the number of runs n was fixed before the event; re-read
 * after every run and stopped at the first p ≤ α it is a different procedure whose false-alarm rate
 * grows with the number of looks (test/engine/evidence.test.ts measures it). It is carried beside
 * the test martingales only for comparison, labelled with that restriction.
 */
import { combinePValues } from '../combine.js';

/** Fisher's combination of the same runs: valid only when the number of runs was fixed in advance. */
export interface FixedSampleFisher {
  readonly pValue: number;
  readonly statistic: number;
  readonly runs: number;
  readonly validity: 'fixed-run-count-only';
  readonly note: string;
}

const FISHER_NOTE = 'Fisher p-value of these runs: valid only if this number of runs was fixed before the event; re-reading it after every run inflates false alarms.';

export function fisherFixed(pvalues: ArrayLike<number>): FixedSampleFisher | null {
  if (pvalues.length === 0) return null;
  const c = combinePValues(pvalues, 'fisher');
  return { pValue: c.pValue, statistic: c.statistic, runs: c.count, validity: 'fixed-run-count-only', note: FISHER_NOTE };
}
