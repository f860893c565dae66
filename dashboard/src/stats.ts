/**
 * The little arithmetic the dashboard needs for drawing (never for judging: every p-value shown comes
 * from the server). Pure functions, no DOM.
 */

/**
 * Upper quantile of the χ² distribution, P(X > x) = alpha.
 * - 2 degrees of freedom: closed form x = −2 ln α (the χ²₂ tail is exp(−x/2)).
 * - 1 degree of freedom: x = z², z the (1 − α/2) normal quantile (Acklam's rational approximation,
 *   relative error below 1.2e-9, plenty for drawing a threshold line).
 */
export function chiSquareUpper(alpha: number, df: 1 | 2): number {
  if (!(alpha > 0 && alpha < 1)) return Number.NaN;
  if (df === 2) return -2 * Math.log(alpha);
  const z = normalQuantile(1 - alpha / 2);
  return z * z;
}

/** Standard normal quantile (P. J. Acklam's algorithm, lower-tail form). */
export function normalQuantile(p: number): number {
  if (!(p > 0 && p < 1)) return Number.NaN;
  const a = [-3.969683028665376e1, 2.209460984245205e2, -2.759285104469687e2, 1.38357751867269e2, -3.066479806614716e1, 2.506628277459239];
  const b = [-5.447609879822406e1, 1.615858368580409e2, -1.556989798598866e2, 6.680131188771972e1, -1.328068155288572e1];
  const c = [-7.784894002430293e-3, -3.223964580411365e-1, -2.400758277161838, -2.549732539343734, 4.374664141464968, 2.938163982698783];
  const d = [7.784695709041462e-3, 3.224671290700398e-1, 2.445134137142996, 3.754408661907416];
  const lo = 0.02425;
  if (p < lo) {
    const q = Math.sqrt(-2 * Math.log(p));
    return (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) / ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
  }
  if (p > 1 - lo) return -normalQuantile(1 - p);
  const q = p - 0.5;
  const r = q * q;
  return ((((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r + a[5]) * q) / (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1);
}

/** Points of the ellipse x²/λ1 + y²/λ2 = r2, closed (first point repeated). */
export function ellipse(l1: number, l2: number, r2: number, n = 96): Array<[number, number]> {
  const a = Math.sqrt(Math.max(0, l1 * r2));
  const b = Math.sqrt(Math.max(0, l2 * r2));
  const out: Array<[number, number]> = [];
  for (let i = 0; i <= n; i++) {
    const th = (2 * Math.PI * i) / n;
    out.push([a * Math.cos(th), b * Math.sin(th)]);
  }
  return out;
}

export interface Histogram {
  /** Bin edges, length bins + 1. */
  readonly edges: number[];
  readonly counts: number[];
}

/**
 * Histogram of `values` on equal bins over [min(values ∪ extra), max(values ∪ extra)], with the bin
 * count from the Freedman–Diaconis rule clamped to [8, 40] (so the marked value always lies inside).
 */
export function histogram(values: readonly number[], extra?: number): Histogram {
  const finite = values.filter((v) => Number.isFinite(v));
  if (finite.length === 0) return { edges: [], counts: [] };
  const sorted = [...finite].sort((x, y) => x - y);
  let lo = sorted[0];
  let hi = sorted[sorted.length - 1];
  if (extra !== undefined && Number.isFinite(extra)) {
    lo = Math.min(lo, extra);
    hi = Math.max(hi, extra);
  }
  if (hi === lo) hi = lo + 1;
  const q = (p: number) => sorted[Math.min(sorted.length - 1, Math.floor(p * (sorted.length - 1)))];
  const iqr = q(0.75) - q(0.25);
  const fd = iqr > 0 ? 2 * iqr * Math.cbrt(1 / sorted.length) : (hi - lo) / 10;
  const bins = Math.max(8, Math.min(40, Math.ceil((hi - lo) / fd)));
  const width = (hi - lo) / bins;
  const edges = Array.from({ length: bins + 1 }, (_, i) => lo + i * width);
  const counts = new Array<number>(bins).fill(0);
  for (const v of finite) counts[Math.min(bins - 1, Math.max(0, Math.floor((v - lo) / width)))]++;
  return { edges, counts };
}
