/**
 * Shared data shapes of the engine. Everything numeric is a Float64Array; nothing here does I/O.
 */

/** One channel of a track as described by the event plan (e.g. slant range in metres). */
export interface ChannelSpec {
  readonly name: string;
  readonly unit: string;
  /**
   * Period of a circular channel (360 for a bearing in degrees). Circular channels are unwrapped
   * along the track before smoothing so that a crossing of north does not look like a jump.
   */
  readonly period?: number;
  /** Practical tolerance in channel units, used for the equivalence check (may be absent). */
  readonly tolerance?: number;
}

/**
 * One track's samples after ingest: times strictly increasing, no duplicates, all finite.
 * `values[c][i]` is channel c at time `t[i]`.
 */
export interface RawTrack {
  readonly vignette: string;
  readonly track: string;
  readonly t: Float64Array;
  readonly values: readonly Float64Array[];
}

/** How many functional principal components to keep. */
export type ComponentRule =
  | { readonly kind: 'variance'; readonly fraction: number }
  | { readonly kind: 'fixed'; readonly count: number };

/** Methods for combining independent p-values across runs. */
export type CombinationMethod = 'fisher' | 'stouffer' | 'tippett' | 'cauchy';

/** Analysis settings carried by the event plan. */
export interface AnalysisSettings {
  /** Significance level used for verdicts, thresholds and bands. */
  readonly alpha: number;
  readonly components: ComponentRule;
  /** Number of points of the common evaluation grid over [0, horizon]. */
  readonly gridSize: number;
  /** Number of B-spline segments of the P-spline smoother over [0, horizon]. */
  readonly segments: number;
  readonly combination: CombinationMethod;
  /**
   * A gap between consecutive samples longer than `gapFactor` times the track's median sampling
   * interval (and longer than two grid steps) is a dropout: the grid points inside it are not judged.
   */
  readonly gapFactor: number;
  /**
   * Seed of the tie-breaking draws of the smoothed p-values and of the Monte Carlo calibration of
   * combined evidence (engine/calibrate.ts, engine/event.ts): the same plan gives the same results.
   */
  readonly seed?: number;
  /**
   * Time registration of the diagnosis (engine/diagnosis.ts, engine/registration.ts): `span` is the
   * largest lag searched, as a fraction of the vignette's horizon (shift in ±span·horizon, warp lags
   * within the same bound). Absent: DEFAULT_REGISTRATION.
   */
  readonly registration?: RegistrationSettings;
}

export interface RegistrationSettings {
  /** Largest lag searched, as a fraction of the horizon, in (0, 0.5]. */
  readonly span: number;
}

export const DEFAULT_REGISTRATION: RegistrationSettings = { span: 0.2 };

export const DEFAULT_ANALYSIS: AnalysisSettings = {
  alpha: 0.05,
  components: { kind: 'variance', fraction: 0.95 },
  gridSize: 128,
  segments: 40,
  combination: 'fisher',
  gapFactor: 6,
  seed: 1,
  registration: DEFAULT_REGISTRATION,
};
