/**
 * The evidence of a whole event: per statistic, per vignette, and their combination.
 *
 * Each completed run carries three p-values, one per statistic (l2, score, residual; ../calibrate.ts),
 * each exactly Uniform(0, 1) under the null for smoothed conformal p-values (super-uniform for rank
 * p-values), and its overall p-value (kept for the fixed-sample comparison). For every statistic s
 * and vignette v there is one test martingale M^{s,v} on that vignette's runs (./martingale.ts), its
 * bets chosen from that vignette's earlier values of s only.
 *
 *  - A vignette's evidence: the average over the three statistics, (1/3) Σ_s M^{s,v}. An average of
 *    test martingales on the same runs is one: E[Σ_s M^s_n | past] = Σ_s M^s_{n−1} E[f^s_n | past]
 *    ≤ Σ_s M^s_{n−1}, whatever the dependence between the three p-values of one run (Vovk & Wang,
 *    "E-values: calibration, combination and applications", Ann. Statist. 49(3):1736–1754, 2021,
 *    doi:10.1214/20-AOS2020, §4: the average is the admissible symmetric merging of e-values). A
 *    statistic that sees the discrepancy carries the average; the price is a factor 3 at most.
 *  - Across vignettes, per statistic, in arrival order: each run's factor is chosen from its own
 *    vignette's earlier runs, which are part of the event's past, so under the global null (every
 *    vignette agrees, each run's p-values super-uniform given all earlier runs of the event, e.g.
 *    independent runs)
 *      product  C^s = Π_v M^{s,v}          (a discrepancy shared by many vignettes),
 *      average  C^s = (1/V) Σ_v M^{s,v}    (one confined to a few; at least M^{s,v}/V for each v),
 *      hedge    C^s = ½ (product + average) (either; at least half of each),
 *    are test supermartingales; the average and the hedge need the vignettes fixed in advance (by
 *    the plan, not by the data) so that their weights do not depend on the data.
 *  - The event's evidence: (1/3) Σ_s C^s, again a test supermartingale, so Ville's inequality gives
 *    P(it ever reaches 1/α | global null) ≤ α. Every per-statistic C^s and every vignette's average
 *    is one too, and is reported with its own crossing.
 * A crossing of one vignette's evidence controls that vignette's false alarm at α; for all V
 * vignettes at once use α/V per vignette, or the event's evidence.
 */
import { STATISTICS, type StatisticName } from '../calibrate.js';
import { createBettor, DEFAULT_STRATEGY, type Bettor, type EvidenceStrategy } from './bettors.js';
import { checkP, DEFAULT_RESOLUTION, latticeIndex } from './calibrators.js';
import { fisherFixed, type FixedSampleFisher } from './fisher-fixed.js';
import { checkAlpha, needs, type SequentialEvidence } from './martingale.js';

/** One completed run of an event: its vignette (stream), overall p-value and per-statistic p-values. */
export interface StreamRun {
  readonly stream: string;
  /** The run's overall p-value (for the fixed-sample comparison and display; not bet on). */
  readonly p: number;
  readonly l2: number;
  readonly score: number;
  readonly residual: number;
}

export type EventCombination = 'product' | 'average' | 'hedge';

export interface EventEvidenceOptions {
  /** L per stream (N + 1 of the vignette); streams not listed use `resolution`. */
  readonly resolutions?: Readonly<Record<string, number>>;
  readonly resolution?: number;
  /** How vignettes are combined per statistic (module comment); default 'product'. */
  readonly combine?: EventCombination;
  /**
   * The vignettes of the plan, fixed before the event (required in spirit for 'average' and 'hedge':
   * their weights must not depend on the data). Default: the streams that appear in the runs, in order.
   */
  readonly streams?: readonly string[];
}

/** An evidence process that is an average of test martingales (not a running product). */
export interface CombinedEvidence {
  readonly alpha: number;
  readonly threshold: number;
  /** The evidence after each run it counts (a vignette's runs, or the event's in arrival order). */
  readonly martingale: Float64Array;
  readonly current: number;
  /** The run (1-based, in the same count) at which the evidence first reached 1/α, or null. */
  readonly crossedAt: number | null;
  readonly established: boolean;
}

export interface VignetteEvidence extends CombinedEvidence {
  /** The largest p-value that, as all three p-values of the next run, would establish it (null if none can or already established). */
  readonly nextRunNeeds: number | null;
  /** Fisher's fixed-sample p-value of the vignette's overall p-values (fixed run count only). */
  readonly fisherFixed: FixedSampleFisher | null;
}

export interface EventEvidence extends CombinedEvidence {
  readonly combine: EventCombination;
  /** Per vignette: the average over statistics, and each statistic's own martingale. */
  readonly streams: ReadonlyArray<{
    readonly stream: string;
    readonly evidence: VignetteEvidence;
    readonly statistics: Readonly<Record<StatisticName, SequentialEvidence>>;
  }>;
  /** Per statistic: the vignettes' martingales of that statistic combined (in arrival order). */
  readonly statistics: Readonly<Record<StatisticName, CombinedEvidence>>;
  /** Fisher's fixed-sample p-value of all runs' overall p-values (fixed run count only). */
  readonly fisherFixed: FixedSampleFisher | null;
}

/** The event combination of per-vignette levels of one statistic, from their product and sum. */
export function combineLevels(combine: EventCombination, product: number, sum: number, vignettes: number): number {
  const average = sum / vignettes;
  return combine === 'product' ? product : combine === 'average' ? average : 0.5 * (product + average);
}

interface Track {
  readonly bettor: Bettor;
  readonly ps: number[];
  readonly es: number[];
  readonly ms: number[];
  m: number;
  crossedAt: number | null;
}

function record(values: number[], threshold: number): { crossedAt: number | null } {
  const i = values.findIndex((v) => v >= threshold);
  return { crossedAt: i >= 0 ? i + 1 : null };
}

function combined(alpha: number, values: number[]): CombinedEvidence {
  const threshold = 1 / alpha;
  const { crossedAt } = record(values, threshold);
  return { alpha, threshold, martingale: Float64Array.from(values), current: values.length > 0 ? values[values.length - 1] : 1, crossedAt, established: crossedAt !== null };
}

/** The largest lattice p that, as all three p-values of the next run, lifts the average of `levels` to the threshold. */
function vignetteNeeds(bettors: readonly Bettor[], levels: readonly number[], threshold: number): number | null {
  const S = bettors.length;
  const at = (k: number): number => bettors.reduce((a, b, s) => a + levels[s] * b.value(k), 0) / S;
  if (!(at(1) >= threshold)) return null;
  // Every bet is non-increasing in the cell, so the crossing cells form a prefix: binary search.
  let lo = 1;
  let hi = bettors[0].resolution;
  while (lo < hi) {
    const mid = (lo + hi + 1) >> 1;
    if (at(mid) >= threshold) lo = mid;
    else hi = mid - 1;
  }
  return lo / bettors[0].resolution;
}

/**
 * Evidence per statistic, per vignette and for the whole event from runs in arrival order (module
 * comment). Throws a RangeError naming the run for a p-value outside (0, 1] or an unknown vignette.
 */
export function eventEvidence(
  runs: readonly StreamRun[],
  alpha: number,
  strategy: EvidenceStrategy = DEFAULT_STRATEGY,
  options: EventEvidenceOptions = {},
): EventEvidence {
  checkAlpha(alpha);
  const combine = options.combine ?? 'product';
  const names: string[] = [...(options.streams ?? [])];
  for (const r of runs) {
    if (names.includes(r.stream)) continue;
    if (options.streams && combine !== 'product') throw new RangeError(`eventEvidence: run of vignette ${r.stream}, which is not in the declared streams`);
    names.push(r.stream);
  }
  const V = names.length;
  const S = STATISTICS.length;
  const threshold = 1 / alpha;
  const resolutionOf = (s: string): number => options.resolutions?.[s] ?? options.resolution ?? DEFAULT_RESOLUTION;
  const state = new Map<string, { resolution: number; tracks: Track[]; overall: number[]; average: number[] }>(
    names.map((s) => {
      const resolution = resolutionOf(s);
      const tracks = STATISTICS.map(() => ({ bettor: createBettor(strategy, resolution), ps: [], es: [], ms: [], m: 1, crossedAt: null }));
      return [s, { resolution, tracks, overall: [], average: [] }];
    }),
  );
  const product = new Float64Array(S).fill(1);
  const sum = new Float64Array(S).fill(V); // Σ_v M^{s,v}, every vignette starting at 1
  const perStatistic: number[][] = STATISTICS.map(() => []);
  const event: number[] = [];
  runs.forEach((r, i) => {
    const v = state.get(r.stream);
    if (!v) throw new RangeError(`eventEvidence: unknown vignette ${r.stream}`);
    checkP(r.p, `eventEvidence: run ${i + 1} (${r.stream}), overall`);
    let total = 0;
    let vignetteTotal = 0;
    STATISTICS.forEach((name, s) => {
      const p = r[name];
      checkP(p, `eventEvidence: run ${i + 1} (${r.stream}), ${name}`);
      const t = v.tracks[s];
      const k = latticeIndex(p, v.resolution);
      const e = t.bettor.value(k);
      t.bettor.observe(k);
      sum[s] += t.m * e - t.m;
      product[s] *= e;
      t.m *= e;
      t.ps.push(p);
      t.es.push(e);
      t.ms.push(t.m);
      if (t.crossedAt === null && t.m >= threshold) t.crossedAt = t.ps.length;
      const c = combineLevels(combine, product[s], sum[s], V);
      perStatistic[s].push(c);
      total += c / S;
      vignetteTotal += t.m / S;
    });
    v.overall.push(r.p);
    v.average.push(vignetteTotal);
    event.push(total);
  });
  const streams = names.map((stream) => {
    const v = state.get(stream);
    if (!v) throw new RangeError(`eventEvidence: unknown vignette ${stream}`);
    const statistics = Object.fromEntries(
      STATISTICS.map((name, s) => {
        const t = v.tracks[s];
        const ev: SequentialEvidence = {
          alpha,
          threshold,
          resolution: v.resolution,
          eValues: Float64Array.from(t.es),
          martingale: Float64Array.from(t.ms),
          current: t.m,
          crossedAt: t.crossedAt,
          established: t.crossedAt !== null,
          nextRunNeeds: t.crossedAt !== null ? null : needs(t.bettor, t.m, threshold),
          fisherFixed: fisherFixed(t.ps),
        };
        return [name, ev];
      }),
    ) as Record<StatisticName, SequentialEvidence>;
    const base = combined(alpha, v.average);
    const evidence: VignetteEvidence = {
      ...base,
      nextRunNeeds: base.established ? null : vignetteNeeds(v.tracks.map((t) => t.bettor), v.tracks.map((t) => t.m), threshold),
      fisherFixed: fisherFixed(v.overall),
    };
    return { stream, evidence, statistics };
  });
  const statistics = Object.fromEntries(STATISTICS.map((name, s) => [name, combined(alpha, perStatistic[s])])) as Record<StatisticName, CombinedEvidence>;
  return { ...combined(alpha, event), combine, streams, statistics, fisherFixed: fisherFixed(runs.map((r) => r.p)) };
}
