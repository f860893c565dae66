/**
 * Envelopes of the simulated tracks, per channel and in physical units.
 *
 * Pointwise central bands: at each grid point the empirical quantiles (α/2, 1 − α/2) of the
 * simulated values for the 50, 90 and 99 % bands (linear interpolation between order statistics,
 * Hyndman & Fan, The American Statistician 50(4):361–365, 1996, definition 7, doi:10.2307/2684934,
 * the default of numpy.quantile and R).
 *
 * Simultaneous band: m(t) ± c·s(t) for all channels at once, with c the conformal quantile of the
 * maximum standardised deviation T_i = max_{c,t} |x_i(t) − m_{−i}(t)| / s_{−i}(t), where m_{−i} and
 * s_{−i} leave curve i out (exact closed-form downdates of the mean and variance). With c the
 * ⌈(1 − α)(N + 1)⌉-th smallest T_i, a new simulated track stays wholly inside with probability
 * close to 1 − α: the T_i are leave-one-out scores, the jackknife form of the conformal quantile
 * (Lei et al., JASA 2018, doi:10.1080/01621459.2017.1307116; Barber et al., Ann. Statist. 49(1),
 * 2021, doi:10.1214/20-AOS1965); test/engine/envelope.test.ts measures the coverage on fresh
 * tracks. The max-|t| construction is the usual functional "sup-t" band (e.g. Degras, Statistica
 * Sinica
 * 21:1735–1765, 2011, doi:10.5705/ss.2009.207).
 */
export interface Band {
  readonly level: number;
  readonly lower: Float64Array;
  readonly upper: Float64Array;
}

export interface ChannelEnvelope {
  readonly mean: Float64Array;
  readonly sd: Float64Array;
  readonly pointwise: readonly Band[];
  readonly simultaneous: Band & { readonly multiplier: number };
}

export const POINTWISE_LEVELS = [0.5, 0.9, 0.99] as const;

/** Quantile of sorted values, Hyndman–Fan definition 7. */
export function quantileSorted(sorted: ArrayLike<number>, q: number): number {
  const n = sorted.length;
  if (n === 0) return Number.NaN;
  const h = (n - 1) * q;
  const lo = Math.floor(h);
  const hi = Math.min(n - 1, lo + 1);
  return sorted[lo] + (h - lo) * (sorted[hi] - sorted[lo]);
}

/**
 * Envelopes of N simulated curves that hold `channels` blocks of M grid values each.
 * `active` marks the grid points to use (all when absent); inactive points get NaN bands.
 */
export function simulatedEnvelope(
  curves: readonly Float64Array[],
  channels: number,
  alpha: number,
  active?: Uint8Array,
): ChannelEnvelope[] {
  const N = curves.length;
  if (N < 3) throw new RangeError(`simulatedEnvelope: need at least 3 curves, got ${N}`);
  const M = curves[0].length / channels;
  const column = new Float64Array(N);
  const out: ChannelEnvelope[] = [];
  // Leave-one-out maximum standardised deviation, over all channels.
  const tmax = new Float64Array(N);
  const perChannel: Array<{ mean: Float64Array; sd: Float64Array; bands: Band[] }> = [];
  for (let c = 0; c < channels; c++) {
    const mean = new Float64Array(M);
    const sd = new Float64Array(M);
    const bands = POINTWISE_LEVELS.map((level) => ({ level, lower: new Float64Array(M), upper: new Float64Array(M) }));
    for (let g = 0; g < M; g++) {
      const d = c * M + g;
      if (active && !active[g]) {
        mean[g] = sd[g] = Number.NaN;
        for (const b of bands) b.lower[g] = b.upper[g] = Number.NaN;
        continue;
      }
      let m = 0;
      for (let i = 0; i < N; i++) m += curves[i][d];
      m /= N;
      let ss = 0;
      for (let i = 0; i < N; i++) {
        const r = curves[i][d] - m;
        ss += r * r;
      }
      mean[g] = m;
      sd[g] = Math.sqrt(ss / (N - 1));
      for (let i = 0; i < N; i++) column[i] = curves[i][d];
      column.sort();
      for (const b of bands) {
        b.lower[g] = quantileSorted(column, (1 - b.level) / 2);
        b.upper[g] = quantileSorted(column, 1 - (1 - b.level) / 2);
      }
      // LOO: m_{-i} = (N m − x_i)/(N − 1); SS_{-i} = SS − N/(N − 1)·(x_i − m)².
      for (let i = 0; i < N; i++) {
        const r = curves[i][d] - m;
        const mLoo = (N * m - curves[i][d]) / (N - 1);
        const ssLoo = Math.max(ss - (N / (N - 1)) * r * r, 0);
        const sLoo = Math.sqrt(ssLoo / (N - 2));
        const z = sLoo > 0 ? Math.abs(curves[i][d] - mLoo) / sLoo : 0;
        if (z > tmax[i]) tmax[i] = z;
      }
    }
    perChannel.push({ mean, sd, bands });
  }
  const sortedT = Float64Array.from(tmax).sort();
  const rank = Math.ceil((1 - alpha) * (N + 1));
  const multiplier = rank > N ? Number.POSITIVE_INFINITY : sortedT[rank - 1];
  for (const { mean, sd, bands } of perChannel) {
    const lower = new Float64Array(M);
    const upper = new Float64Array(M);
    for (let g = 0; g < M; g++) {
      lower[g] = mean[g] - multiplier * sd[g];
      upper[g] = mean[g] + multiplier * sd[g];
    }
    out.push({ mean, sd, pointwise: bands, simultaneous: { level: 1 - alpha, lower, upper, multiplier } });
  }
  return out;
}
