/**
 * Combination of independent p-values across runs.
 *
 * - Fisher (R. A. Fisher, "Statistical Methods for Research Workers", 4th ed. 1932, §21.1):
 *   X = −2 Σ ln p_i ~ χ²_{2k} under the null. For even degrees of freedom the survival function has
 *   the closed form P(χ²_{2k} > x) = e^{−x/2} Σ_{j<k} (x/2)^j / j! (Abramowitz & Stegun 26.4.21),
 *   summed here in log space so that it stays accurate for tiny p.
 * - Stouffer (Stouffer et al., "The American Soldier", 1949): Z = Σ Φ⁻¹(1 − p_i)/√k, p = 1 − Φ(Z).
 * - Tippett (Tippett, "The Methods of Statistics", 1931): p = 1 − (1 − min p)^k.
 * - Cauchy combination (Liu & Xie, JASA 115(529):393–402, 2020, doi:10.1080/01621459.2018.1554485):
 *   T = (1/k) Σ tan((½ − p_i)π), p = ½ − arctan(T)/π; valid under arbitrary dependence for small p.
 *   tan((½ − p)π) is evaluated as cot(πp) (or −cot(π(1 − p))) to keep precision at both ends.
 *
 * p-values must be in (0, 1]; p = 0 is refused (a Monte Carlo rank p-value is never 0).
 */
import { normalCdf, normalQuantile } from './normal.js';
import type { CombinationMethod } from './types.js';

export interface Combined {
  readonly method: CombinationMethod;
  readonly statistic: number;
  readonly pValue: number;
  readonly count: number;
}

function check(pvalues: ArrayLike<number>): void {
  if (pvalues.length === 0) throw new RangeError('combinePValues: no p-values to combine');
  for (let i = 0; i < pvalues.length; i++) {
    const p = pvalues[i];
    if (!(p > 0 && p <= 1)) throw new RangeError(`combinePValues: p-value ${i} is ${p}, outside (0, 1]`);
  }
}

/** Survival function of χ² with an even number 2k of degrees of freedom (closed form). */
export function chiSquareSfEven(x: number, k: number): number {
  if (!Number.isInteger(k) || k < 1) throw new RangeError(`chiSquareSfEven: k must be a positive integer, got ${k}`);
  if (x <= 0) return 1;
  const h = x / 2;
  // log of the terms h^j / j!, summed with the log-sum-exp trick.
  let logTerm = 0;
  let maxLog = 0;
  const logs = new Float64Array(k);
  for (let j = 0; j < k; j++) {
    if (j > 0) logTerm += Math.log(h) - Math.log(j);
    logs[j] = logTerm;
    if (logTerm > maxLog) maxLog = logTerm;
  }
  let s = 0;
  for (let j = 0; j < k; j++) s += Math.exp(logs[j] - maxLog);
  return Math.min(1, Math.exp(-h + maxLog + Math.log(s)));
}

function fisher(p: ArrayLike<number>): Combined {
  let x = 0;
  for (let i = 0; i < p.length; i++) x -= 2 * Math.log(p[i]);
  return { method: 'fisher', statistic: x, pValue: chiSquareSfEven(x, p.length), count: p.length };
}

function stouffer(p: ArrayLike<number>): Combined {
  let z = 0;
  for (let i = 0; i < p.length; i++) z += -normalQuantile(p[i]); // Φ⁻¹(1 − p) = −Φ⁻¹(p)
  z /= Math.sqrt(p.length);
  return { method: 'stouffer', statistic: z, pValue: normalCdf(-z), count: p.length };
}

function tippett(p: ArrayLike<number>): Combined {
  let m = 1;
  for (let i = 0; i < p.length; i++) m = Math.min(m, p[i]);
  // 1 − (1 − m)^k computed as −expm1(k·log1p(−m)) to keep precision for small m.
  return { method: 'tippett', statistic: m, pValue: -Math.expm1(p.length * Math.log1p(-m)), count: p.length };
}

/** tan((½ − p)π) of the Cauchy combination, evaluated as a cotangent near both ends (module comment). */
export function cauchyTerm(p: number): number {
  if (p < 0.25) return 1 / Math.tan(Math.PI * p);
  if (p > 0.75) return -1 / Math.tan(Math.PI * (1 - p));
  return Math.tan((0.5 - p) * Math.PI);
}

function cauchy(p: ArrayLike<number>): Combined {
  let t = 0;
  for (let i = 0; i < p.length; i++) t += cauchyTerm(p[i]);
  t /= p.length;
  const pValue = t > 0 ? Math.atan(1 / t) / Math.PI : 0.5 - Math.atan(t) / Math.PI;
  return { method: 'cauchy', statistic: t, pValue, count: p.length };
}

export function combinePValues(pvalues: ArrayLike<number>, method: CombinationMethod): Combined {
  check(pvalues);
  switch (method) {
    case 'fisher':
      return fisher(pvalues);
    case 'stouffer':
      return stouffer(pvalues);
    case 'tippett':
      return tippett(pvalues);
    case 'cauchy':
      return cauchy(pvalues);
    default: {
      const never: never = method;
      throw new RangeError(`combinePValues: unknown method ${String(never)}`);
    }
  }
}

/**
 * Holm's step-down adjustment of p-values for a family of tests (Holm, "A simple sequentially
 * rejective multiple test procedure", Scand. J. Statist. 6(2):65–70, 1979): sort ascending,
 * p̃_(i) = max_{j≤i} min(1, (m − j + 1) p_(j)). Rejecting every p̃ ≤ α controls the family-wise
 * error rate at α under any dependence. Used for per-vignette verdicts across the vignettes of an
 * event, so that one of nine agreeing conditions is not flagged by chance one time in four.
 */
export function holmAdjust(pvalues: ArrayLike<number>): Float64Array {
  const m = pvalues.length;
  const order = Array.from({ length: m }, (_, i) => i).sort((a, b) => pvalues[a] - pvalues[b]);
  const out = new Float64Array(m);
  let running = 0;
  order.forEach((idx, rank) => {
    running = Math.max(running, Math.min(1, (m - rank) * pvalues[idx]));
    out[idx] = running;
  });
  return out;
}
