/**
 * Uniform cubic B-spline basis on [0, H] with `nseg` equal segments.
 *
 * Knots at h·(j − 3), j = 0 … nseg + 6, h = H / nseg; K = nseg + 3 basis functions, of which four
 * are non-zero at any t. On segment s (t ∈ [s·h, (s+1)·h)) with u = t/h − s the non-zero values,
 * for basis functions s … s+3, are the uniform cubic pieces
 *   (1−u)³/6,  (3u³ − 6u² + 4)/6,  (−3u³ + 3u² + 3u + 1)/6,  u³/6
 * (de Boor, "A Practical Guide to Splines", rev. ed. 2001, ch. IX; Eilers & Marx, Statistical
 * Science 11(2), 1996, doi:10.1214/ss/1038425655, which builds P-splines on exactly this basis).
 * The same basis is scipy.interpolate.BSpline with t = h·arange(−3, nseg+4), k = 3.
 */
export interface SplineBasis {
  readonly horizon: number;
  readonly nseg: number;
  /** Number of basis functions, nseg + 3. */
  readonly size: number;
}

export function splineBasis(horizon: number, nseg: number): SplineBasis {
  if (!(horizon > 0) || !Number.isFinite(horizon)) throw new RangeError(`splineBasis: horizon must be positive, got ${horizon}`);
  if (!Number.isInteger(nseg) || nseg < 1) throw new RangeError(`splineBasis: nseg must be a positive integer, got ${nseg}`);
  return { horizon, nseg, size: nseg + 3 };
}

/**
 * Evaluate the four non-zero basis functions at t (clamped to [0, H]).
 * Writes the values to `out[0..3]` and returns the index of the first of the four.
 */
export function basisAt(basis: SplineBasis, t: number, out: Float64Array): number {
  const h = basis.horizon / basis.nseg;
  const x = t <= 0 ? 0 : t >= basis.horizon ? basis.horizon : t;
  let s = Math.floor(x / h);
  if (s >= basis.nseg) s = basis.nseg - 1;
  const u = x / h - s;
  const u2 = u * u;
  const u3 = u2 * u;
  const v = 1 - u;
  out[0] = (v * v * v) / 6;
  out[1] = (3 * u3 - 6 * u2 + 4) / 6;
  out[2] = (-3 * u3 + 3 * u2 + 3 * u + 1) / 6;
  out[3] = u3 / 6;
  return s;
}

/**
 * Sparse evaluation operator of the basis at fixed points: for point i, basis functions
 * first[i] … first[i]+3 with values values[4i … 4i+3]. Precompute once per grid.
 */
export interface BasisEvaluation {
  readonly points: Float64Array;
  readonly first: Int32Array;
  readonly values: Float64Array;
}

export function evaluateBasis(basis: SplineBasis, points: Float64Array): BasisEvaluation {
  const n = points.length;
  const first = new Int32Array(n);
  const values = new Float64Array(4 * n);
  const tmp = new Float64Array(4);
  for (let i = 0; i < n; i++) {
    first[i] = basisAt(basis, points[i], tmp);
    values.set(tmp, 4 * i);
  }
  return { points, first, values };
}

/** f(points) = B · coefficients, written to `out` (allocated when absent). */
export function applyBasis(ev: BasisEvaluation, coefficients: Float64Array, out?: Float64Array, offset = 0): Float64Array {
  const n = ev.points.length;
  const result = out ?? new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const j = ev.first[i];
    const b = 4 * i;
    result[offset + i] =
      ev.values[b] * coefficients[j] +
      ev.values[b + 1] * coefficients[j + 1] +
      ev.values[b + 2] * coefficients[j + 2] +
      ev.values[b + 3] * coefficients[j + 3];
  }
  return result;
}
