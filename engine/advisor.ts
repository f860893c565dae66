/**
 * Run-count advisor: from the per-run p-values seen so far, how many MORE live runs would most
 * likely bring the anytime-valid evidence of ./evidence/ to its threshold 1/α, if the runs keep
 * looking like the ones so far; and when more runs are unlikely to change the conclusion.
 *
 * Method (Monte Carlo, seeded, a bounded number of draws):
 *  1. Replay the observed runs through the betting strategy: the evidence now, M, and the bettor's
 *     state (what it has learnt about the alternative).
 *  2. "The pattern continues": the future p-values are drawn from a law fitted to the runs so far.
 *     On the probit scale z = Φ⁻¹(1 − p) (lattice cell k taken at its middle, (k − ½)/L) the null
 *     is z ~ N(0, 1); the fitted pattern is z ~ N(μ̂, σ̂²) with μ̂ = z̄ (maximum likelihood) and
 *     σ̂² = (ν₀ · 1 + Σ (z_i − z̄)²)/(ν₀ + n − 1), the sample variance pooled with the null's variance
 *     1 carried by ν₀ pseudo-degrees of freedom (default 1), so that one or two runs do not give a
 *     degenerate spread (the normal model's conjugate pooling, Gelman et al., "Bayesian Data
 *     Analysis", 3rd ed., CRC 2013, §3.3). A future run's p-value is Φ(−z) rounded up to the lattice.
 *     Why this model: the engine's overall p-values under a discrepancy are not Beta(a, 1)-shaped
 *     (they pile up between 0.01 and 0.3 and hardly ever reach 1/(N+1)), which a shift and a spread
 *     on the probit scale follow well enough for this purpose; a bootstrap of two or three values is too lumpy (it makes
 *     null patterns look discrepant unless heavily smoothed and mixed with the uniform law, and then
 *     discrepant ones look null); and drawing the pattern from a posterior instead of plugging in
 *     the fit answers a different question (over all patterns the few runs allow, not "if this one
 *     continues"), and recommended 2–5 times more runs than needed on clearly discrepant patterns.
 *     It is a plug-in: it ignores that the pattern is estimated, which is why the message calls an
 *     estimate from fewer than five runs rough. Measured (test/engine/advisor.test.ts, engine
 *     p-values): for histories that represent the pattern, the stated probability is reached within
 *     Monte Carlo error plus about 0.05; over random 2-run histories not yet decisive the advice leans
 *     conservative (they look weaker than the pattern that produced them).
 *  3. Each continuation runs the SAME strategy from the current state for up to `horizon` more runs
 *     and records the first run at which the evidence reaches 1/α. The advice is the smallest m with
 *     P̂(reached within m more runs) ≥ target (default 0.8), and that probability.
 *  4. Futility: more runs are called unlikely to change the conclusion when the probability of
 *     reaching the threshold within `horizon` more runs is below `futileBelow` (default 0.1) both
 *     for the fitted pattern AND averaged over the patterns the runs so far allow: (μ, σ²) drawn
 *     per continuation from the posterior of the normal model with the same pooling, σ² =
 *     (ν₀ + Σ (z_i − z̄)²)/χ²_{ν₀+n−1}, μ | σ² ~ N(z̄, σ²/n) (Gelman et al. 2013, §3.2–3.3; χ² by
 *     Marsaglia & Tsang's gamma method, ACM TOMS 26(3):363–372, 2000, doi:10.1145/358407.358414).
 *     The plug-in alone would call two agreeing runs futile; the posterior does not, because two
 *     runs cannot rule out a discrepancy that fifty runs would find.
 * Whatever the simulation says, a crossing of the evidence is a false alarm with probability at most
 * α (Ville's inequality; see ./evidence/martingale.ts): the simulation guides how many runs to plan, it never
 * touches the guarantee. The estimate is only as good as the pattern seen so far: from two or three
 * runs it is rough (test/engine/advisor.test.ts measures how rough).
 *
 * Runs with three p-values (l2, score, residual): a vignette's evidence is the average of its three
 * statistics' martingales (./evidence/event.ts), and each statistic's future p-values are drawn from
 * its own fitted pattern, independently of the other two. That ignores the dependence between the
 * statistics of one run (l2 and residual move together under a level shift); the average is carried
 * by the strongest statistic, so the reach probability depends mostly on that one's pattern.
 *
 * For the event, a "round" is one more run of each vignette; the event's evidence (the average over
 * statistics of the product, average or hedge over vignettes, ./evidence/event.ts) continues with
 * every vignette's pattern drawn from its own runs (from all the event's runs for a vignette without
 * any yet).
 */
import { STATISTICS } from './calibrate.js';
import {
  combineLevels,
  createBettor,
  DEFAULT_RESOLUTION,
  DEFAULT_STRATEGY,
  latticeIndex,
  type Bettor,
  type EventCombination,
  type EvidenceStrategy,
  type StreamRun,
} from './evidence/index.js';
import { normalCdf, normalQuantile } from './normal.js';
import { createRng, type Rng } from './rng.js';

export interface AdviceOptions {
  readonly strategy?: EvidenceStrategy;
  /** L = N + 1 of the p-values (default DEFAULT_RESOLUTION). */
  readonly resolution?: number;
  /** Probability of a decision the advice aims for (default 0.8). */
  readonly target?: number;
  /** Most additional runs (rounds, for the event) considered (default 50, at most MAX_HORIZON). */
  readonly horizon?: number;
  /** Simulated continuations (default 1000, at most MAX_DRAWS). */
  readonly draws?: number;
  readonly seed?: number;
  /** Below this probability of a decision within `horizon`, more runs are called futile (default 0.1). */
  readonly futileBelow?: number;
  /** ν₀, the null variance's weight in the fitted spread, in degrees of freedom (default 1). */
  readonly priorDf?: number;
}

export const MAX_HORIZON = 1000;
export const MAX_DRAWS = 100_000;

export interface RunAdvice {
  readonly runsSoFar: number;
  readonly alpha: number;
  readonly threshold: number;
  /** The evidence now (the test martingale after the runs so far). */
  readonly evidence: number;
  /** The evidence has reached 1/α (it stays so). */
  readonly established: boolean;
  /** More runs (rounds, for the event) for a decision with probability ≥ target; 0 if established; null if not within the horizon. */
  readonly additionalRuns: number | null;
  /** Estimated probability of a decision within `additionalRuns` (within `horizon` when that is null). */
  readonly probability: number;
  /** P̂(decision within `horizon` more runs) for the fitted pattern. */
  readonly probabilityWithinHorizon: number;
  /** The same averaged over the patterns the runs allow (posterior); computed only when futility is in question, else null. */
  readonly probabilityWithinHorizonPosterior: number | null;
  readonly horizon: number;
  readonly target: number;
  /** P̂(decision within j more runs) for the fitted pattern, j = 1 … horizon (entry j − 1). */
  readonly reachProbabilities: Float64Array;
  /** More runs are unlikely to change the conclusion (the pattern looks null, allowing for its uncertainty). */
  readonly futile: boolean;
  /** If the evidence reaches the threshold, the chance it is a false alarm is at most this (α, Ville). */
  readonly falseAlarmBound: number;
  readonly draws: number;
  readonly message: string;
}

interface Settings {
  readonly strategy: EvidenceStrategy;
  readonly target: number;
  readonly horizon: number;
  readonly draws: number;
  readonly seed: number;
  readonly futileBelow: number;
  readonly priorDf: number;
}

function settingsOf(alpha: number, o: AdviceOptions): Settings {
  if (!(alpha > 0 && alpha < 1)) throw new RangeError(`alpha must be in (0, 1), got ${alpha}`);
  const s: Settings = {
    strategy: o.strategy ?? DEFAULT_STRATEGY,
    target: o.target ?? 0.8,
    horizon: o.horizon ?? 50,
    draws: o.draws ?? 1000,
    seed: o.seed ?? 1,
    futileBelow: o.futileBelow ?? 0.1,
    priorDf: o.priorDf ?? 1,
  };
  if (!(s.target > 0 && s.target < 1)) throw new RangeError(`target must be in (0, 1), got ${s.target}`);
  if (!Number.isInteger(s.horizon) || s.horizon < 1 || s.horizon > MAX_HORIZON) throw new RangeError(`horizon must be an integer in [1, ${MAX_HORIZON}], got ${s.horizon}`);
  if (!Number.isInteger(s.draws) || s.draws < 1 || s.draws > MAX_DRAWS) throw new RangeError(`draws must be an integer in [1, ${MAX_DRAWS}], got ${s.draws}`);
  if (!(s.futileBelow >= 0 && s.futileBelow < 1)) throw new RangeError(`futileBelow must be in [0, 1), got ${s.futileBelow}`);
  if (!(s.priorDf > 0 && Number.isFinite(s.priorDf))) throw new RangeError(`priorDf must be finite and > 0, got ${s.priorDf}`);
  return s;
}

/** The probit-normal pattern fitted to the runs so far (module comment, step 2). */
export interface PatternFit {
  /** μ̂ = z̄. */
  readonly mu: number;
  /** σ̂, the spread pooled with the null's. */
  readonly sigma: number;
  readonly runs: number;
  /** ν₀ + Σ (z_i − z̄)², the posterior scale sum. */
  readonly scaleSum: number;
  /** ν₀ + n − 1, the posterior degrees of freedom of σ². */
  readonly df: number;
}

export function fitPattern(pvalues: ArrayLike<number>, resolution: number, priorDf = 1): PatternFit {
  const n = pvalues.length;
  if (n === 0) return { mu: 0, sigma: 1, runs: 0, scaleSum: priorDf, df: priorDf };
  const z = Float64Array.from({ length: n }, (_, i) => -normalQuantile((latticeIndex(pvalues[i], resolution) - 0.5) / resolution));
  let mean = 0;
  for (const v of z) mean += v / n;
  let ss = 0;
  for (const v of z) ss += (v - mean) ** 2;
  const df = priorDf + n - 1;
  return { mu: mean, sigma: Math.sqrt((priorDf + ss) / df), runs: n, scaleSum: priorDf + ss, df };
}

function cellSampler(mu: number, sigma: number, resolution: number, rng: Rng): () => number {
  return () => {
    const p = normalCdf(-(mu + sigma * rng.normal()));
    return p > 0 ? latticeIndex(Math.min(1, p), resolution) : 1;
  };
}

/** A generator of future lattice cells (1 … L) under the fitted pattern (the plug-in). */
export function patternSampler(fit: PatternFit, resolution: number, rng: Rng): () => number {
  return cellSampler(fit.mu, fit.sigma, resolution, rng);
}

/**
 * Gamma(shape, 1) deviate by Marsaglia & Tsang (2000); shape < 1 through Gamma(shape + 1)·U^{1/shape}.
 * The rejection loop accepts with probability > 0.95 per try; its bound of 200 tries is never reached
 * in practice (probability below 1e−250) but keeps it finite.
 */
function gammaDeviate(shape: number, rng: Rng): number {
  if (shape < 1) return gammaDeviate(shape + 1, rng) * Math.pow(1 - rng.uniform(), 1 / shape);
  const d = shape - 1 / 3;
  const c = 1 / Math.sqrt(9 * d);
  for (let t = 0; t < 200; t++) {
    const x = rng.normal();
    const v0 = 1 + c * x;
    if (v0 <= 0) continue;
    const v = v0 * v0 * v0;
    const u = 1 - rng.uniform();
    if (Math.log(u) < 0.5 * x * x + d - d * v + d * Math.log(v)) return d * v;
  }
  throw new Error('gammaDeviate: no acceptance within 200 tries');
}

/** A pattern drawn from the posterior (module comment, step 4), then its generator of lattice cells. */
export function posteriorPatternSampler(fit: PatternFit, resolution: number, rng: Rng): () => number {
  const sigma2 = fit.scaleSum / (2 * gammaDeviate(fit.df / 2, rng));
  const mu = fit.mu + Math.sqrt(sigma2 / Math.max(1, fit.runs)) * rng.normal();
  return cellSampler(mu, Math.sqrt(sigma2), resolution, rng);
}

/** One martingale being continued: statistic `statistic` of vignette `vignette`. */
interface StreamState {
  readonly bettor: Bettor;
  readonly evidence: number;
  readonly fit: PatternFit;
  readonly vignette: number;
  readonly statistic: number;
}

/** The shape of the evidence being continued: V vignettes × S statistics and how vignettes combine. */
interface Layout {
  readonly vignettes: number;
  readonly statistics: number;
  readonly combine: EventCombination;
}

function replay(pvalues: ArrayLike<number>, strategy: EvidenceStrategy, resolution: number, threshold: number): { bettor: Bettor; evidence: number; established: boolean } {
  const bettor = createBettor(strategy, resolution);
  let m = 1;
  let established = false;
  for (let i = 0; i < pvalues.length; i++) {
    const k = latticeIndex(pvalues[i], resolution);
    m *= bettor.value(k);
    bettor.observe(k);
    if (m >= threshold) established = true;
  }
  return { bettor, evidence: m, established };
}

/**
 * P̂(the combined evidence reaches the threshold within j more rounds), j = 1 … horizon: each
 * continuation clones every stream's bettor, draws a generator per stream, and plays rounds (one
 * run of every vignette, all its statistics) until the threshold or the horizon. The evidence is
 * (1/S) Σ_s combine_v(M^{s,v}), kept up to date through each statistic's product and sum.
 */
function simulateReach(
  streams: readonly StreamState[],
  layout: Layout,
  threshold: number,
  s: Settings,
  rng: Rng,
  generator: (fit: PatternFit, resolution: number, rng: Rng) => () => number,
): Float64Array {
  const { vignettes: V, statistics: S, combine } = layout;
  const counts = new Float64Array(s.horizon);
  const fixed = generator === patternSampler ? streams.map((x) => patternSampler(x.fit, x.bettor.resolution, rng)) : null;
  const product = new Float64Array(S);
  const sum = new Float64Array(S);
  for (let d = 0; d < s.draws; d++) {
    const bettors = streams.map((x) => x.bettor.clone());
    const levels = streams.map((x) => x.evidence);
    const next = fixed ?? streams.map((x) => generator(x.fit, x.bettor.resolution, rng));
    product.fill(1);
    sum.fill(V);
    streams.forEach((x, i) => {
      product[x.statistic] *= levels[i];
      sum[x.statistic] += levels[i] - 1;
    });
    let hit = 0;
    for (let j = 1; j <= s.horizon && hit === 0; j++) {
      for (let v = 0; v < V && hit === 0; v++) {
        for (let i = 0; i < streams.length; i++) {
          if (streams[i].vignette !== v) continue;
          const k = next[i]();
          const e = bettors[i].value(k);
          bettors[i].observe(k);
          const st = streams[i].statistic;
          sum[st] += levels[i] * e - levels[i];
          product[st] *= e;
          levels[i] *= e;
        }
        let value = 0;
        for (let st = 0; st < S; st++) value += combineLevels(combine, product[st], sum[st], V) / S;
        if (value >= threshold) hit = j;
      }
    }
    if (hit > 0) counts[hit - 1]++;
  }
  const reach = new Float64Array(s.horizon);
  let acc = 0;
  for (let j = 0; j < s.horizon; j++) {
    acc += counts[j];
    reach[j] = acc / s.draws;
  }
  return reach;
}

function fmt(x: number): string {
  return x >= 100 ? x.toFixed(0) : x.toPrecision(2);
}

function pct(x: number): string {
  return `${Math.round(100 * x)} %`;
}

interface Unit {
  readonly one: string;
  readonly many: string;
  readonly scope: string;
}

/** Simulate and word the advice (module comment, steps 3 and 4). */
function advise(
  what: { readonly runsSoFar: number; readonly evidence: number; readonly established: boolean },
  streams: readonly StreamState[],
  layout: Layout,
  alpha: number,
  s: Settings,
  unit: Unit,
): RunAdvice {
  const threshold = 1 / alpha;
  const base = { runsSoFar: what.runsSoFar, alpha, threshold, evidence: what.evidence, horizon: s.horizon, target: s.target, falseAlarmBound: alpha, draws: s.draws };
  const guarantee = `If the evidence reaches ${fmt(threshold)}, the chance that this is a false alarm is at most ${pct(alpha)} (Ville's inequality), however many runs are added or when the event stops.`;
  if (what.established) {
    return {
      ...base,
      established: true,
      additionalRuns: 0,
      probability: 1,
      probabilityWithinHorizon: 1,
      probabilityWithinHorizonPosterior: null,
      reachProbabilities: new Float64Array(s.horizon).fill(1),
      futile: false,
      message:
        `${unit.scope}: the evidence that the live runs do not behave like the simulation is established ` +
        `(it reached ${fmt(threshold)}; now ${fmt(what.evidence)} after ${what.runsSoFar} runs). ` +
        `It stays established whatever later runs show, so more runs will not change this conclusion. ` +
        `The chance that it is a false alarm is at most ${pct(alpha)}.`,
    };
  }
  if (what.runsSoFar === 0 || streams.length === 0) {
    return {
      ...base,
      established: false,
      additionalRuns: null,
      probability: 0,
      probabilityWithinHorizon: 0,
      probabilityWithinHorizonPosterior: null,
      reachProbabilities: new Float64Array(s.horizon),
      futile: false,
      message: `${unit.scope}: no runs judged yet, so there is no pattern to extrapolate. ${guarantee}`,
    };
  }
  const rng = createRng(s.seed);
  const reach = simulateReach(streams, layout, threshold, s, rng, patternSampler);
  let m: number | null = null;
  for (let j = 0; j < s.horizon; j++) {
    if (reach[j] >= s.target) {
      m = j + 1;
      break;
    }
  }
  const within = reach[s.horizon - 1];
  const posterior = within < s.futileBelow ? simulateReach(streams, layout, threshold, s, rng, posteriorPatternSampler)[s.horizon - 1] : null;
  const futile = posterior !== null && posterior < s.futileBelow;
  const few = what.runsSoFar < 5 ? ` This is extrapolated from only ${what.runsSoFar} run${what.runsSoFar === 1 ? '' : 's'}, so treat it as rough.` : '';
  const now = `${unit.scope}: the evidence against the simulation stands at ${fmt(what.evidence)} after ${what.runsSoFar} run${what.runsSoFar === 1 ? '' : 's'} (it starts at 1 and must reach ${fmt(threshold)} to establish a discrepancy).`;
  let message: string;
  if (m !== null) {
    const count = m === 1 ? `1 more ${unit.one}` : `${m} more ${unit.many}`;
    message = `${now} If the runs keep looking like the ones so far, ${count} would reach it with probability about ${pct(reach[m - 1])}.${few} ${guarantee}`;
  } else if (futile && posterior !== null) {
    message =
      `${now} The runs so far look like the simulation: even ${s.horizon} more ${unit.many} would reach the threshold with probability only about ${pct(Math.max(within, posterior))}, ` +
      `allowing for how uncertain the pattern of ${what.runsSoFar} runs is, so more runs are unlikely to change the conclusion. ` +
      `Not reaching it is not proof of agreement: it may only mean the test has little power for the discrepancies that matter.`;
  } else if (posterior !== null) {
    message =
      `${now} If the runs keep looking like the ones so far, even ${s.horizon} more ${unit.many} would reach it with probability only about ${pct(within)}; ` +
      `but ${what.runsSoFar} run${what.runsSoFar === 1 ? '' : 's'} cannot rule out a discrepancy that more runs would find (about ${pct(posterior)} allowing for that), so it is too early to call further runs futile. ${guarantee}`;
  } else {
    message = `${now} Even ${s.horizon} more ${unit.many} would reach it with probability only about ${pct(within)} (less than the ${pct(s.target)} aimed for).${few} ${guarantee}`;
  }
  return {
    ...base,
    established: false,
    additionalRuns: m,
    probability: m !== null ? reach[m - 1] : within,
    probabilityWithinHorizon: within,
    probabilityWithinHorizonPosterior: posterior,
    reachProbabilities: reach,
    futile,
    message,
  };
}

/**
 * Advice for one stream of p-values (one statistic, or a single p per run), in run order (module comment).
 */
export function adviseRuns(pvalues: ArrayLike<number>, alpha: number, options: AdviceOptions = {}): RunAdvice {
  const s = settingsOf(alpha, options);
  const resolution = options.resolution ?? DEFAULT_RESOLUTION;
  const threshold = 1 / alpha;
  const state = replay(pvalues, s.strategy, resolution, threshold);
  const what = { runsSoFar: pvalues.length, evidence: state.evidence, established: state.established };
  const streams = pvalues.length > 0 ? [{ bettor: state.bettor, evidence: state.evidence, fit: fitPattern(pvalues, resolution, s.priorDf), vignette: 0, statistic: 0 }] : [];
  return advise(what, streams, { vignettes: 1, statistics: 1, combine: 'product' }, alpha, s, { one: 'run', many: 'runs', scope: 'This vignette' });
}

export interface EventAdviceOptions extends AdviceOptions {
  readonly combine?: EventCombination;
  /** The plan's vignettes; a round is one more run of each (default: those with runs). */
  readonly streams?: readonly string[];
  readonly resolutions?: Readonly<Record<string, number>>;
}

export interface EventAdvice {
  /** Advice for the event's evidence, counted in rounds (one more run of every vignette). */
  readonly event: RunAdvice;
  readonly streams: ReadonlyArray<{ readonly stream: string; readonly advice: RunAdvice }>;
}

type Triple = Pick<StreamRun, 'l2' | 'score' | 'residual'>;

/** Replay runs (arrival order) through one bettor per vignette and statistic, as ./evidence/event.ts does. */
function replayEvent(
  runs: readonly StreamRun[],
  names: readonly string[],
  combine: EventCombination,
  strategy: EvidenceStrategy,
  resolutionOf: (v: string) => number,
  threshold: number,
): { bettors: Map<string, Bettor[]>; levels: Map<string, number[]>; evidence: number; established: boolean } {
  const S = STATISTICS.length;
  const V = names.length;
  const bettors = new Map(names.map((v) => [v, STATISTICS.map(() => createBettor(strategy, resolutionOf(v)))] as const));
  const levels = new Map(names.map((v) => [v, STATISTICS.map(() => 1)] as const));
  const product = new Float64Array(S).fill(1);
  const sum = new Float64Array(S).fill(V);
  let evidence = 1;
  let established = false;
  for (const r of runs) {
    const bs = bettors.get(r.stream);
    const ls = levels.get(r.stream);
    if (!bs || !ls) throw new RangeError(`adviseEvent: unknown vignette ${r.stream}`);
    evidence = 0;
    STATISTICS.forEach((name, st) => {
      const k = latticeIndex(r[name], bs[st].resolution);
      const e = bs[st].value(k);
      bs[st].observe(k);
      sum[st] += ls[st] * e - ls[st];
      product[st] *= e;
      ls[st] *= e;
      evidence += combineLevels(combine, product[st], sum[st], V) / S;
    });
    if (evidence >= threshold) established = true;
  }
  return { bettors, levels, evidence, established };
}

/**
 * Advice for one vignette from its runs' three p-values, in run order: its evidence is the average
 * of the three statistics' martingales (./evidence/event.ts).
 */
export function adviseVignette(runs: readonly Triple[], alpha: number, options: AdviceOptions = {}): RunAdvice {
  const s = settingsOf(alpha, options);
  const resolution = options.resolution ?? DEFAULT_RESOLUTION;
  const threshold = 1 / alpha;
  const tagged = runs.map((r) => ({ stream: 'v', p: 1, l2: r.l2, score: r.score, residual: r.residual }));
  const state = replayEvent(tagged, ['v'], 'product', s.strategy, () => resolution, threshold);
  const bs = state.bettors.get('v') ?? [];
  const ls = state.levels.get('v') ?? [];
  const streams: StreamState[] =
    runs.length > 0
      ? STATISTICS.map((name, st) => ({ bettor: bs[st], evidence: ls[st], fit: fitPattern(runs.map((r) => r[name]), resolution, s.priorDf), vignette: 0, statistic: st }))
      : [];
  const what = { runsSoFar: runs.length, evidence: state.evidence, established: state.established };
  return advise(what, streams, { vignettes: 1, statistics: STATISTICS.length, combine: 'product' }, alpha, s, { one: 'run', many: 'runs', scope: 'This vignette' });
}

/**
 * Advice per vignette and for the whole event from runs in arrival order (module comment). The
 * event's evidence is replayed exactly as ./evidence/event.ts eventEvidence computes it.
 */
export function adviseEvent(runs: readonly StreamRun[], alpha: number, options: EventAdviceOptions = {}): EventAdvice {
  const s = settingsOf(alpha, options);
  const combine = options.combine ?? 'product';
  const names: string[] = [...(options.streams ?? [])];
  for (const r of runs) if (!names.includes(r.stream)) names.push(r.stream);
  const resolutionOf = (v: string): number => options.resolutions?.[v] ?? options.resolution ?? DEFAULT_RESOLUTION;
  const threshold = 1 / alpha;
  const replayed = replayEvent(runs, names, combine, s.strategy, resolutionOf, threshold);
  const states: StreamState[] = names.flatMap((v, vi) => {
    const mine = runs.filter((r) => r.stream === v);
    const from = mine.length > 0 ? mine : runs; // a vignette without runs yet borrows the pattern of all the event's runs
    const bs = replayed.bettors.get(v);
    const ls = replayed.levels.get(v);
    if (!bs || !ls) throw new RangeError(`adviseEvent: unknown vignette ${v}`);
    return STATISTICS.map((name, st) => ({ bettor: bs[st], evidence: ls[st], fit: fitPattern(from.map((r) => r[name]), bs[st].resolution, s.priorDf), vignette: vi, statistic: st }));
  });
  const streamAdvice = names.map((stream, i) => ({
    stream,
    advice: adviseVignette(
      runs.filter((r) => r.stream === stream),
      alpha,
      { ...options, resolution: resolutionOf(stream), seed: s.seed + 7919 * (i + 1) },
    ),
  }));
  const unit: Unit = {
    one: `round (one run of each of the ${names.length} vignettes)`,
    many: `rounds (one run of each of the ${names.length} vignettes per round)`,
    scope: 'The event',
  };
  const layout: Layout = { vignettes: names.length, statistics: STATISTICS.length, combine };
  return { event: advise({ runsSoFar: runs.length, evidence: replayed.evidence, established: replayed.established }, runs.length > 0 ? states : [], layout, alpha, s, unit), streams: streamAdvice };
}
