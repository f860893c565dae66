/**
 * The little geometry the dashboard needs for drawing (never for judging: every p-value shown comes
 * from the server). Pure functions, no DOM. Quantiles and distributions are the engine's
 * (engine/chisquare.ts, engine/normal.ts), never computed here.
 */

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
