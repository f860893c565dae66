/**
 * TEST ORACLE ONLY: the data-quality monitor as it was before the in-place rewrite of
 * engine/quality.ts, copied verbatim below this header (only this header added, and the import
 * paths unchanged because it has none). test/engine/quality-equivalence.test.ts and
 * test/bench/quality.bench.ts feed the same points to both and require identical flags; the bench
 * times one against the other. Not used by the service.
 */
/**
 * Data-quality flags on a live track while it arrives: a pure reducer over points in arrival order.
 *
 *   let s = initialQuality(options);
 *   for (const p of points) { const r = observePoint(s, p); s = r.state; show(r.flags); }
 *   show(closeTrack(s, horizon));
 *
 * Every flag is raised once per episode, when the episode has ended (the first normal point after
 * it, or closeTrack), so it carries its whole extent: a 12 s dropout is one flag with its start and
 * end, a three-sample glitch one flag. The state is never mutated; each call returns a new one.
 *
 * Order. The service accepts points up to a tolerance out of order (ingest/service/limits.ts
 * `timeReversalTolerance`, 5 s by default), so the checks run on points in track time: a point is
 * held until the latest time seen has passed it by more than `reorderTolerance`, then released in
 * (t, seq) order. A point whose t is earlier than the latest t seen by more than the tolerance is a
 * `time-reversal` and is left out of the other checks. Reorderings within the tolerance therefore
 * release the same sequence and raise exactly the same flags (test/engine/quality.test.ts checks
 * it); the price is that flags arrive up to `reorderTolerance` of track time late.
 *
 * Checks on released points:
 *   dropout   the nominal interval is the running median of the last `intervalWindow` intervals
 *             (after `warmupIntervals` of them; the warm-up intervals are then checked too); an
 *             interval longer than `gapFactor` × nominal is a dropout from the last point before it
 *             to the first after it. Its default 6 is AnalysisSettings.gapFactor, so the flag
 *             matches the gaps the assessment leaves out (./grid.ts observedWindow). Dropout
 *             intervals do not enter the running median.
 *   jump      noise-aware rate check per channel with a `maxRate` (units/s). Raw noise alone moves a
 *             radar range by ±30 m/s between 0.5 s samples (sd 8 m), so the rate bound cannot be
 *             applied to raw differences. Instead:
 *               prediction  ŷ(t) from the Theil–Sen line (median of pairwise slopes, median
 *                           intercept; Sen, JASA 63:1379–1389, 1968, doi:10.1080/01621459.1968.10480934)
 *                           through the last `predictionPoints` accepted points: robust to an outlier
 *                           among them;
 *               noise scale σ̂ = 1.4826 · median |r| over the last `scaleWindow` one-step prediction
 *                           residuals r = y − ŷ of accepted points (the MAD about zero, Rousseeuw &
 *                           Croux, JASA 88:1273–1283, 1993, doi:10.1080/01621459.1993.10476408): the
 *                           scale of exactly the quantity tested, noise and prediction error together,
 *                           estimated on the fly;
 *               test        a point is a jump when both
 *                             |y − ŷ| − maxRate · Δt > rateMargin · σ̂    (1: beyond the rate bound)
 *                             |y − ŷ| > noiseMargin · σ̂                   (2: beyond the noise)
 *                           with Δt the time since the channel's previous sample. (1) says the point
 *                           left the local trend faster than the plan allows, by more than one noise
 *                           unit; (2) keeps the false-flag rate negligible whatever the rate bound is
 *                           worth in noise units (6 σ̂: a Gaussian tail of 2·10⁻⁹). Neither alone will
 *                           do: with the demo plan maxRate · Δt is 2.5 range-noise sd (so (1) alone
 *                           would flag noise) but 10 bearing-noise sd (so "allowance + 3.5 σ̂" would
 *                           miss a 6-deg bearing glitch, which is only 1 to 2 deg beyond the bound);
 *                           (2) alone would flag real manoeuvres the rate bound permits.
 *             No test before `scaleWarmup` residuals (about 20 s at 2 Hz: σ̂ from fewer is too rough;
 *             with 16 and a 9-point line, 3 of 1800 clean demo tracks got a false flag, all in their
 *             first 30 s; with 40 and 15 points, none). Outlying
 *             points are kept out of the history, so consecutive glitched samples are each judged
 *             against the clean trend and form one episode. The window of 15 points (7.5 s at 2 Hz)
 *             keeps a glitch that narrowly escapes the test (3 of the points) from tilting the line
 *             and flagging the clean samples after it (with 9 points it did, for 5-deg glitches).
 *             An episode reaching `maxJumpSamples` is taken as a persistent step: the flag is raised
 *             and the prediction restarts from the new level. Without a maxRate there is no jump
 *             check (the rate bound is what makes a jump implausible). Circular channels (`period`)
 *             are unwrapped on the fly (./unwrap.ts rule).
 *             Assumption: the rate changes slowly over the window. Extrapolating a line fitted to
 *             the last T seconds misses a constant acceleration a by a·(T²/6 + T·Δt + Δt²)/2 ≈ 6.7·a
 *             one step (0.5 s) ahead for T = 7.5 s, so accelerations beyond about
 *             (maxRate·Δt + noiseMargin·σ̂)/6.7 can be flagged (the demo's vessel stays far below).
 *   frozen    the same value exactly, more than `frozenSamples` samples in a row spanning more than
 *             `frozenSeconds`.
 *   short     (closeTrack) the last point is earlier than horizon − `shortTolerance` (default three
 *             nominal intervals, as ./grid.ts uses for a partial track).
 */

export interface QualityChannel {
  readonly name: string;
  /** Largest plausible rate of change, units/s (the plan's `maxRate`); no jump check without it. */
  readonly maxRate?: number;
  /** Period of a circular channel (360 for a bearing in degrees). */
  readonly period?: number;
}

/** One live point as it arrives. `values[c]` may be NaN when channel c has no reading. */
export interface QualityPoint {
  readonly seq: number;
  readonly t: number;
  readonly values: readonly number[];
}

export type QualityFlagKind = 'dropout' | 'time-reversal' | 'jump' | 'frozen' | 'short';

export interface QualityFlag {
  readonly kind: QualityFlagKind;
  /** Start of the episode, seconds on the track clock. */
  readonly t: number;
  /** End of the episode (absent for a single instant). */
  readonly tEnd?: number;
  /** Channel index and name, for channel-specific flags (jump, frozen). */
  readonly channel?: number;
  readonly channelName?: string;
  readonly detail: string;
}

export interface QualityOptions {
  readonly channels: readonly QualityChannel[];
  /** Dropout: an interval longer than this many nominal intervals (default 6). */
  readonly gapFactor?: number;
  /** Intervals seen before the nominal interval is trusted (default 10). */
  readonly warmupIntervals?: number;
  /** Intervals in the running median (default 31). */
  readonly intervalWindow?: number;
  /** Seconds a point may arrive behind the latest time seen without a flag (default 5). */
  readonly reorderTolerance?: number;
  /** Jump: noise units beyond maxRate · Δt (default 1). */
  readonly rateMargin?: number;
  /** Jump: noise units from the local trend (default 6). */
  readonly noiseMargin?: number;
  /** Accepted points in the Theil–Sen line (default 15). */
  readonly predictionPoints?: number;
  /** Prediction residuals in the noise scale (default 128). */
  readonly scaleWindow?: number;
  /** Residuals needed before the jump check starts (default 40). */
  readonly scaleWarmup?: number;
  /** Flagged samples in a row taken as a persistent step (default 8). */
  readonly maxJumpSamples?: number;
  /** Frozen: more than this many equal samples (default 5) ... */
  readonly frozenSamples?: number;
  /** ... spanning more than this many seconds (default 2). */
  readonly frozenSeconds?: number;
  /** Short: seconds before the horizon a track may end (default three nominal intervals). */
  readonly shortTolerance?: number;
}

/** Every limit with its default (see the module comment for what each does). */
export const QUALITY_DEFAULTS = {
  gapFactor: 6,
  warmupIntervals: 10,
  intervalWindow: 31,
  reorderTolerance: 5,
  rateMargin: 1,
  noiseMargin: 6,
  predictionPoints: 15,
  scaleWindow: 128,
  scaleWarmup: 40,
  maxJumpSamples: 8,
  frozenSamples: 5,
  frozenSeconds: 2,
} as const;

type Limits = { readonly [K in keyof typeof QUALITY_DEFAULTS]: number };
type Settings = Limits & { readonly channels: readonly QualityChannel[]; readonly shortTolerance?: number };

/** Minimum history for a prediction. */
const MIN_PREDICTION = 5;
const MAD_SCALE = 1.482602218505602;

interface Episode {
  readonly start: number;
  readonly end: number;
  readonly count: number;
  /** Largest excess (jump) or lateness (time reversal). */
  readonly size: number;
}

interface Run {
  readonly value: number;
  readonly start: number;
  readonly end: number;
  readonly count: number;
}

interface ChannelState {
  readonly lastRaw?: number;
  readonly lastValue?: number;
  readonly lastT?: number;
  /** Accepted samples (t, unwrapped value), newest last. */
  readonly history: ReadonlyArray<readonly [number, number]>;
  /** |one-step prediction residual| of accepted samples. */
  readonly residuals: readonly number[];
  readonly jump?: Episode & { readonly points: ReadonlyArray<readonly [number, number]>; readonly sigma: number };
  readonly frozen?: Run;
}

/**
 * Points held back for reordering, sorted by (t, seq): the window [start, end) of an array that
 * successive states share. A state appends in place only when its window ends at the array's end,
 * so the window of an older state never changes (a persistent append-only sequence, as in
 * Okasaki, "Purely Functional Data Structures", 1998, ch. 2, used linearly): a point in time order
 * costs O(1) instead of a copy of the whole buffer; a point out of order copies the window.
 */
interface HeldPoints {
  readonly arr: QualityPoint[];
  readonly start: number;
  readonly end: number;
}

/** Dead prefix (released points) above which the shared array is compacted. */
const COMPACT_AFTER = 1024;

/** The reducer's state (treat as opaque). */
export interface QualityState {
  readonly settings: Settings;
  readonly maxT: number;
  /** Held points, sorted by (t, seq). */
  readonly buffer: HeldPoints;
  readonly lastT?: number;
  readonly intervals: readonly number[];
  readonly warm: boolean;
  readonly warmup: ReadonlyArray<readonly [number, number]>;
  readonly reversal?: Episode;
  readonly channels: readonly ChannelState[];
}

function median(values: ArrayLike<number>): number {
  return selectMedian(Float64Array.from(values));
}

function pushBounded<T>(list: readonly T[], item: T, cap: number): T[] {
  const out = list.length >= cap ? list.slice(list.length - cap + 1) : list.slice();
  out.push(item);
  return out;
}

function fmt(x: number, digits = 2): string {
  return Number(x.toFixed(digits)).toString();
}

/** Theil–Sen line through the points (times increasing), evaluated at t. */
function theilSen(points: ReadonlyArray<readonly [number, number]>, t: number): number {
  const n = points.length;
  const ref = points[n - 1][0];
  const slopes = new Float64Array((n * (n - 1)) / 2);
  let m = 0;
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) {
      const dt = points[j][0] - points[i][0];
      if (dt > 0) slopes[m++] = (points[j][1] - points[i][1]) / dt;
    }
  }
  const b = m > 0 ? selectMedian(slopes.subarray(0, m)) : 0;
  const a = selectMedian(Float64Array.from(points, ([s, y]) => y - b * (s - ref)));
  return a + b * (t - ref);
}

/** k-th smallest of a (0-based), reordering a: Hoare's selection with a middle pivot. */
function select(a: Float64Array, k: number): number {
  let lo = 0;
  let hi = a.length - 1;
  while (lo < hi) {
    const pivot = a[(lo + hi) >> 1];
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        const x = a[i];
        a[i] = a[j];
        a[j] = x;
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else break;
  }
  return a[k];
}

/** Median of a (reordered in place). */
function selectMedian(a: Float64Array): number {
  const n = a.length;
  if (n === 0) return Number.NaN;
  const upper = select(a, n >> 1);
  if (n % 2) return upper;
  let lower = Number.NEGATIVE_INFINITY;
  for (let i = 0; i < n >> 1; i++) if (a[i] > lower) lower = a[i];
  return (lower + upper) / 2;
}

export function initialQuality(options: QualityOptions): QualityState {
  const settings: Settings = { ...QUALITY_DEFAULTS, ...stripUndefined(options), channels: options.channels };
  for (const [name, v] of Object.entries(settings)) {
    if (typeof v === 'number' && !(v > 0)) throw new RangeError(`initialQuality: ${name} must be positive, got ${v}`);
  }
  return {
    settings,
    maxT: Number.NEGATIVE_INFINITY,
    buffer: { arr: [], start: 0, end: 0 },
    intervals: [],
    warm: false,
    warmup: [],
    channels: options.channels.map(() => channelState(undefined, undefined, undefined, [], [], undefined, undefined)),
  };
}

function stripUndefined(o: QualityOptions): Partial<Settings> {
  return Object.fromEntries(Object.entries(o).filter(([, v]) => v !== undefined)) as Partial<Settings>;
}

function dropoutFlag(a: number, b: number, nominal: number): QualityFlag {
  return { kind: 'dropout', t: a, tEnd: b, detail: `no samples for ${fmt(b - a)} s (nominal interval ${fmt(nominal, 3)} s)` };
}

function jumpFlag(s: Settings, c: number, e: NonNullable<ChannelState['jump']>, persistent: boolean): QualityFlag {
  const ch = s.channels[c];
  const what = e.count === 1 ? '1 sample' : `${e.count} samples`;
  return {
    kind: 'jump',
    t: e.start,
    tEnd: e.count > 1 ? e.end : undefined,
    channel: c,
    channelName: ch.name,
    detail:
      `${ch.name}: ${what} left the local trend by ${fmt(e.size)} more than the rate bound ${ch.maxRate}/s allows ` +
      `(noise scale ${fmt(e.sigma, 3)})${persistent ? '; persistent, taken as a new level' : ''}`,
  };
}

function frozenFlag(s: Settings, c: number, r: Run): QualityFlag | undefined {
  if (!(r.count > s.frozenSamples && r.end - r.start > s.frozenSeconds)) return undefined;
  const name = s.channels[c].name;
  return { kind: 'frozen', t: r.start, tEnd: r.end, channel: c, channelName: name, detail: `${name}: value ${r.value} repeated exactly ${r.count} times over ${fmt(r.end - r.start)} s` };
}

function reversalFlag(s: Settings, e: Episode): QualityFlag {
  const what = e.count === 1 ? '1 point' : `${e.count} points`;
  return {
    kind: 'time-reversal',
    t: e.start,
    tEnd: e.count > 1 ? e.end : undefined,
    detail: `${what} arrived up to ${fmt(e.size)} s behind the latest time seen (tolerance ${s.reorderTolerance} s); left out of the checks`,
  };
}

/** A channel state with every field in the same order (one object shape for the engine's JIT). */
function channelState(
  lastRaw: number | undefined,
  lastValue: number | undefined,
  lastT: number | undefined,
  history: ChannelState['history'],
  residuals: readonly number[],
  jump: ChannelState['jump'],
  frozen: Run | undefined,
): ChannelState {
  return { lastRaw, lastValue, lastT, history, residuals, jump, frozen };
}

/** One channel's checks on a released sample. */
function observeChannel(s: Settings, c: number, ch: ChannelState, t: number, raw: number, flags: QualityFlag[]): ChannelState {
  if (!Number.isFinite(raw)) return ch;
  const spec = s.channels[c];
  let value = raw;
  if (spec.period !== undefined && ch.lastRaw !== undefined && ch.lastValue !== undefined) {
    let step = raw - ch.lastRaw;
    step -= Math.round(step / spec.period) * spec.period;
    value = ch.lastValue + step;
  }
  // Frozen: runs of exactly equal raw values.
  let frozen: Run;
  if (ch.frozen && ch.frozen.value === raw) {
    frozen = { value: raw, start: ch.frozen.start, end: t, count: ch.frozen.count + 1 };
  } else {
    const f = ch.frozen && frozenFlag(s, c, ch.frozen);
    if (f) flags.push(f);
    frozen = { value: raw, start: t, end: t, count: 1 };
  }
  if (spec.maxRate === undefined) return channelState(raw, value, t, ch.history, ch.residuals, undefined, frozen);

  let residual: number | undefined;
  let excess = Number.NEGATIVE_INFINITY;
  let outlying = false;
  let sigma = Number.NaN;
  if (ch.history.length >= MIN_PREDICTION) {
    residual = Math.abs(value - theilSen(ch.history, t));
    excess = residual - spec.maxRate * (t - (ch.lastT ?? t));
    // σ̂ only when the rate bound is exceeded at all (its median is the costly part).
    if (excess > 0 && ch.residuals.length >= s.scaleWarmup) {
      sigma = MAD_SCALE * median(ch.residuals);
      outlying = excess > s.rateMargin * sigma && residual > s.noiseMargin * sigma;
    }
  }
  if (outlying) {
    const prev = ch.jump;
    const point = [t, value] as const;
    const jump = prev
      ? { start: prev.start, end: t, count: prev.count + 1, size: Math.max(prev.size, excess), sigma: prev.sigma, points: [...prev.points, point] }
      : { start: t, end: t, count: 1, size: excess, sigma, points: [point] };
    if (jump.count < s.maxJumpSamples) return channelState(raw, value, t, ch.history, ch.residuals, jump, frozen);
    // A persistent step: flag it and restart the prediction from the new level.
    flags.push(jumpFlag(s, c, jump, true));
    return channelState(raw, value, t, jump.points.slice(-s.predictionPoints), ch.residuals, undefined, frozen);
  }
  if (ch.jump) flags.push(jumpFlag(s, c, ch.jump, false));
  const history = pushBounded(ch.history, [t, value] as const, s.predictionPoints);
  const residuals = residual === undefined ? ch.residuals : pushBounded(ch.residuals, residual, s.scaleWindow);
  return channelState(raw, value, t, history, residuals, undefined, frozen);
}

/** The in-order checks on one released point. */
function release(state: QualityState, p: QualityPoint, flags: QualityFlag[]): QualityState {
  const s = state.settings;
  let { intervals, warm, warmup } = state;
  if (state.lastT !== undefined) {
    const dt = p.t - state.lastT;
    if (!(dt > 0)) return state; // a repeated time: nothing new to check
    // The median is only needed when dt could be a dropout (it is at least the window's minimum).
    const nominal = warm && dt > s.gapFactor * Math.min(...intervals) ? median(intervals) : Number.POSITIVE_INFINITY;
    if (warm && dt > s.gapFactor * nominal) {
      flags.push(dropoutFlag(state.lastT, p.t, nominal));
    } else if (warm) {
      intervals = pushBounded(intervals, dt, s.intervalWindow);
    } else {
      intervals = pushBounded(intervals, dt, s.intervalWindow);
      warmup = [...warmup, [state.lastT, p.t] as const];
      if (warmup.length >= s.warmupIntervals) {
        const first = median(intervals);
        for (const [a, b] of warmup) if (b - a > s.gapFactor * first) flags.push(dropoutFlag(a, b, first));
        warm = true;
        warmup = [];
      }
    }
  }
  const channels = state.channels.map((ch, c) => observeChannel(s, c, ch, p.t, p.values[c], flags));
  return { ...state, lastT: p.t, intervals, warm, warmup, channels };
}

/** Feed one point (in arrival order); returns the new state and the flags of episodes that ended. */
export function observePoint(state: QualityState, point: QualityPoint): { state: QualityState; flags: QualityFlag[] } {
  const s = state.settings;
  if (!Number.isFinite(point.t)) throw new RangeError(`observePoint: t must be finite, got ${point.t}`);
  if (point.values.length !== s.channels.length) {
    throw new RangeError(`observePoint: point ${point.seq} has ${point.values.length} values, the plan ${s.channels.length} channels`);
  }
  const flags: QualityFlag[] = [];
  if (point.t < state.maxT - s.reorderTolerance) {
    const late = state.maxT - point.t;
    const r = state.reversal;
    const reversal = r
      ? { start: Math.min(r.start, point.t), end: Math.max(r.end, point.t), count: r.count + 1, size: Math.max(r.size, late) }
      : { start: point.t, end: point.t, count: 1, size: late };
    return { state: { ...state, reversal }, flags };
  }
  if (state.reversal) flags.push(reversalFlag(s, state.reversal));
  const maxT = Math.max(state.maxT, point.t);
  let { arr, start, end } = state.buffer;
  let at = end;
  while (at > start && (arr[at - 1].t > point.t || (arr[at - 1].t === point.t && arr[at - 1].seq > point.seq))) at--;
  if (at === end && end === arr.length) {
    arr.push(point); // in time order, and this state owns the tail: no other state sees it
    end++;
  } else {
    const copy = arr.slice(start, at);
    copy.push(point);
    for (let i = at; i < end; i++) copy.push(arr[i]);
    arr = copy;
    start = 0;
    end = copy.length;
  }
  let next: QualityState = { ...state, maxT, reversal: undefined };
  let k = start;
  while (k < end && arr[k].t < maxT - s.reorderTolerance) next = release(next, arr[k++], flags);
  if (k > COMPACT_AFTER && k > end - k) {
    arr = arr.slice(k, end);
    end -= k;
    k = 0;
  }
  return { state: { ...next, buffer: { arr, start: k, end } }, flags };
}

/** End of the track: release held points, close open episodes, and check for a short track. */
export function closeTrack(state: QualityState, horizon: number): QualityFlag[] {
  const s = state.settings;
  const flags: QualityFlag[] = [];
  if (state.reversal) flags.push(reversalFlag(s, state.reversal));
  let next: QualityState = state;
  const { arr, start, end } = state.buffer;
  for (let i = start; i < end; i++) next = release(next, arr[i], flags);
  next.channels.forEach((ch, c) => {
    if (ch.jump) flags.push(jumpFlag(s, c, ch.jump, false));
    const f = ch.frozen && frozenFlag(s, c, ch.frozen);
    if (f) flags.push(f);
  });
  const nominal = next.intervals.length > 0 ? median(next.intervals) : 0;
  const tolerance = s.shortTolerance ?? 3 * nominal;
  if (next.lastT === undefined) {
    flags.push({ kind: 'short', t: 0, tEnd: horizon, detail: `no samples; the horizon is ${horizon} s` });
  } else if (next.lastT < horizon - tolerance) {
    flags.push({ kind: 'short', t: next.lastT, tEnd: horizon, detail: `the track ends at ${fmt(next.lastT)} s, ${fmt(horizon - next.lastT)} s short of the ${horizon} s horizon` });
  }
  return flags;
}
