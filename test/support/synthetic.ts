/**
 * Synthetic two-channel functional data for the engine's statistical tests (invented; not the demo).
 *
 * Channel 0 ("position", unit ~ m) and channel 1 ("angle", unit ~ deg) on [0, H]: a fixed mean plus
 * a random combination of smooth modes with decaying variances (a truncated Karhunen–Loève-type
 * expansion), observed at irregular times (nominal interval dtNominal, uniform jitter ±20 %, 3 % of
 * samples missed) with Gaussian noise. Alternatives add a known discrepancy to the live curve.
 */
import { DEFAULT_ANALYSIS, type AnalysisSettings, type ChannelSpec, type RawTrack } from '../../engine/types.js';
import type { Rng } from '../../engine/rng.js';

export const H = 100;

/** The two channels of the synthetic data. */
export const SYNTHETIC_CHANNELS: readonly ChannelSpec[] = [
  { name: 'position', unit: 'm' },
  { name: 'angle', unit: 'deg' },
];

/** Analysis settings of the engine tests: the plan defaults with a coarser grid for speed. */
export const SYNTHETIC_SETTINGS: AnalysisSettings = { ...DEFAULT_ANALYSIS, gridSize: 64, segments: 25 };

export type Discrepancy =
  | { kind: 'none' }
  | { kind: 'shift'; size: number }
  | { kind: 'bump'; size: number; centre: number; width: number }
  | { kind: 'wiggle'; size: number; cycles: number };

export interface SampleOptions {
  readonly dtNominal?: number;
  /** Remove samples in this interval (a dropout). */
  readonly dropout?: readonly [number, number];
  /** Stop observing at this time (an early end). */
  readonly endAt?: number;
  readonly discrepancy?: Discrepancy;
}

const NOISE = [1.0, 0.05] as const;

function truthAt(t: number, a: Float64Array, channel: number, d: Discrepancy): number {
  const u = t / H;
  let v: number;
  if (channel === 0) {
    v = 100 + 40 * u + 12 * a[0] * Math.sin(Math.PI * u) + 6 * a[1] * Math.cos(Math.PI * u) + 3 * a[2] * Math.sin(2 * Math.PI * u) + 1.5 * a[3] * Math.sin(3 * Math.PI * u);
    if (d.kind === 'shift') v += d.size;
    if (d.kind === 'bump') v += d.size * Math.exp(-0.5 * ((t - d.centre) / d.width) ** 2);
    if (d.kind === 'wiggle') v += d.size * Math.sin(2 * Math.PI * d.cycles * u);
  } else {
    v = 30 - 10 * u + 1.2 * a[4] * Math.sin(Math.PI * u) + 0.6 * a[5] * Math.cos(2 * Math.PI * u) + 0.3 * a[0] * u;
  }
  return v;
}

export function sampleTrack(rng: Rng, id: string, options: SampleOptions = {}): RawTrack {
  const dt = options.dtNominal ?? 0.5;
  const d = options.discrepancy ?? { kind: 'none' };
  const a = Float64Array.from({ length: 6 }, () => rng.normal());
  const t: number[] = [];
  const y0: number[] = [];
  const y1: number[] = [];
  const end = options.endAt ?? H;
  for (let s = rng.uniform() * 0.2 * dt; s <= end; s += dt * (0.8 + 0.4 * rng.uniform())) {
    if (rng.uniform() < 0.03) continue;
    if (options.dropout && s > options.dropout[0] && s < options.dropout[1]) continue;
    t.push(s);
    y0.push(truthAt(s, a, 0, d) + NOISE[0] * rng.normal());
    y1.push(truthAt(s, a, 1, d) + NOISE[1] * rng.normal());
  }
  return { vignette: 'V', track: id, t: Float64Array.from(t), values: [Float64Array.from(y0), Float64Array.from(y1)] };
}

export function sampleBaseline(rng: Rng, n: number, dtNominal = 0.5): RawTrack[] {
  return Array.from({ length: n }, (_, i) => sampleTrack(rng, `sim-${i}`, { dtNominal }));
}

// ---------------------------------------------------------------------------------------------
// A manoeuvre generator (added for the diagnosis tests; the functions above are unchanged).

/** Time of the manoeuvre ("the turn") of the manoeuvre generator (s) and its sd between runs. */
export const TURN_TIME = 50;
export const TURN_JITTER_SD = 1;

/** Discrepancies of the manoeuvre generator: those above, or the whole track late by `seconds`. */
export type ManoeuvreDiscrepancy =
  | Discrepancy
  | { kind: 'timeShift'; seconds: number }
  /** A lag that builds up linearly from 0 at `from` to `lag` at `to` (times of the simulations) and then stays. */
  | { kind: 'timeWarp'; lag: number; from: number; to: number };

/**
 * The simulations' time s that a run with a `timeWarp` is at when its clock reads t: the inverse of
 * h(s) = s + δ(s), δ = 0 before `from`, linear to `lag` at `to`, `lag` after.
 */
export function warpInverse(t: number, d: { lag: number; from: number; to: number }): number {
  if (t <= d.from) return t;
  const slope = 1 + d.lag / (d.to - d.from);
  if (t <= d.to + d.lag) return d.from + (t - d.from) / slope;
  return t - d.lag;
}

export interface ManoeuvreOptions {
  readonly dtNominal?: number;
  readonly discrepancy?: ManoeuvreDiscrepancy;
  /** Multiplies the measurement noise sd of both channels (default 1): a noisier run. */
  readonly noiseFactor?: number;
  /**
   * Time of a second manoeuvre (s; default none): channel 1 steps back down by 8 deg along a
   * logistic of scale 2 s at secondTurn + TURN_JITTER_SD·z, a second timing landmark.
   */
  readonly secondTurn?: number;
}

/**
 * The smooth process of `sampleTrack` plus a manoeuvre at T = TURN_TIME + TURN_JITTER_SD·z: channel 1
 * ("angle") steps up by 8 deg along a logistic of scale 2 s, and channel 0 ("position") changes slope
 * by −0.5 m/s through a softplus of scale 3 s. The timing of the manoeuvre varies between runs, so a
 * time shift of a few seconds is a discrepancy only beyond that natural variation. A `timeShift`
 * discrepancy evaluates the whole truth (trend, modes, manoeuvre) at t − seconds: the run is late; a
 * `timeWarp` evaluates it at `warpInverse(t)`: the run falls behind between `from` and `to`.
 * Other discrepancies act on channel 0 as in `sampleTrack`. Noise sd 1 m and 0.05 deg (× noiseFactor).
 */
export function sampleManoeuvreTrack(rng: Rng, id: string, options: ManoeuvreOptions = {}): RawTrack {
  const dt = options.dtNominal ?? 0.5;
  const d = options.discrepancy ?? { kind: 'none' };
  const k = options.noiseFactor ?? 1;
  const a = Float64Array.from({ length: 6 }, () => rng.normal());
  const turn = TURN_TIME + TURN_JITTER_SD * rng.normal();
  // Drawn only for a second manoeuvre, so that the other draws keep their order.
  const second = options.secondTurn !== undefined ? options.secondTurn + TURN_JITTER_SD * rng.normal() : Number.NaN;
  const clock = (s: number): number => (d.kind === 'timeShift' ? s - d.seconds : d.kind === 'timeWarp' ? warpInverse(s, d) : s);
  const rest: Discrepancy = d.kind === 'timeShift' || d.kind === 'timeWarp' ? { kind: 'none' } : d;
  const t: number[] = [];
  const y0: number[] = [];
  const y1: number[] = [];
  for (let s = rng.uniform() * 0.2 * dt; s <= H; s += dt * (0.8 + 0.4 * rng.uniform())) {
    if (rng.uniform() < 0.03) continue;
    const u = clock(s);
    const x = (u - turn) / 3;
    const softplus = 3 * (x > 30 ? x : Math.log1p(Math.exp(x)));
    t.push(s);
    y0.push(truthAt(u, a, 0, rest) - 0.5 * softplus + k * NOISE[0] * rng.normal());
    const back = Number.isNaN(second) ? 0 : 8 / (1 + Math.exp(-(u - second) / 2));
    y1.push(truthAt(u, a, 1, rest) + 8 / (1 + Math.exp(-(u - turn) / 2)) - back + k * NOISE[1] * rng.normal());
  }
  return { vignette: 'V', track: id, t: Float64Array.from(t), values: [Float64Array.from(y0), Float64Array.from(y1)] };
}

export function sampleManoeuvreBaseline(rng: Rng, n: number): RawTrack[] {
  return Array.from({ length: n }, (_, i) => sampleManoeuvreTrack(rng, `sim-${i}`));
}
