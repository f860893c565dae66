/**
 * The built-in demo scenario: invented harbour-approach trials of an uncrewed surface vessel ("the
 * USV"), tracked by a shore radar. Everything here is made up: no real systems, places or people.
 *
 * Geometry (local east/north frame in metres, shore radar at the origin): every lane ends in the same
 * final leg into the harbour mouth, 560 m long on course 330 deg, ending at the mouth 200 m from the
 * radar on bearing 150 deg (so the final leg runs straight in towards the radar). Before it, the
 * vessel comes in from the east-south-east on a 1480 m transit and then makes a dogleg round the end
 * of the north breakwater. The lanes differ in the transit course and the dogleg:
 *   lane 1: transit course 295 deg, dogleg 460 m on 265 deg (30 deg to port, then 65 deg to starboard)
 *   lane 2: transit course 290 deg, dogleg 465 m on 250 deg (40 deg to port, then 80 deg to starboard)
 *   lane 3: transit course 285 deg, dogleg 470 m on 235 deg (50 deg to port, then 95 deg to starboard)
 * which puts the start points about 240 m apart across the approach (range 2509 / 2426 / 2326 m,
 * bearing 119.7 / 114.5 / 109.4 deg). Over a run the range stays in about 290..2560 m and the
 * bearing in about 108..153 deg, far from north.
 *
 * Motion ("the simulation"): the kinematic model of `motion.ts` over a 360 s horizon: cruise
 * 8.5 m/s (sd 0.3 between replicates) in the transit, the turn starting at about t = 166 s (sd about
 * 8 s), speed on the dogleg cruise x (1 - loss) with the loss the model predicts for the sea state
 * (0.10 / 0.15 / 0.20 for low / moderate / high), the turn ending at about t = 228 / 231 / 235 s,
 * then 3 m/s into the harbour mouth. Speed fluctuation (sd 0.08 / 0.15 / 0.25 m/s) and heading
 * wander (sd 1 / 2 / 4 deg) grow with the sea state.
 *
 * Live runs ("the truth"): the same model, except that in the high sea state the true speed loss on
 * the dogleg is 0.50 instead of the predicted 0.20, so live S3 runs leave the dogleg about 40 s late
 * (t = 276 s) and at t = 330 s are about 130 m further out than the simulated runs (whose range
 * there has sd about 29 m). S1 and S2 live runs are draws from the simulated distribution.
 *
 * Radar (simulated and live alike): samples at t = 0 and then every 0.5 s + U(-0.1, 0.1) s up to
 * the 360 s horizon; each sample after the first is missed with probability 0.03. Reported slant
 * range (antenna 15 m above the sea) with N(0, 8 m) noise, and bearing in degrees clockwise from north
 * with N(0, 0.4 deg) noise, reduced to [0, 360).
 *
 * Data-quality events, in live run 1 only: a 12 s radar dropout in S1-L2 (no samples in
 * [95 s, 107 s), during the transit) and a bearing glitch in S2-L3 (the first 3 samples at or after
 * t = 200 s read 6 deg high). Both are listed in `events`.
 *
 * Randomness: each track has its own stream, createRng(streamSeed(seed, vignette, kind, index)), so a
 * track depends only on (seed, vignette, kind, index): the baseline does not change when the number of
 * live runs does, and `generateLiveRun` reproduces live run k of `generateScenario` (without events).
 */
import { createRng, type Rng } from '../../engine/rng.js';
import type { RawTrack } from '../../engine/types.js';
import { simulateApproach, type ApproachConditions, type VesselPath, type Waypoint } from './motion.js';

export interface DemoOptions {
  /** Seed of every random stream of the scenario (default 20261201). */
  seed?: number;
  /** Simulated runs per vignette (default 200). */
  simsPerVignette?: number;
  /** Live runs per vignette (default 1). */
  liveRunsPerVignette?: number;
}

/** What the demo knows to be true of one vignette. */
export interface DemoTruth {
  vignette: string;
  /** True when the live runs do not come from the simulated distribution. */
  disagrees: boolean;
  /** Fraction of cruise speed lost on the dogleg: as the model predicts, and as it really is. */
  speedLossModel: number;
  speedLossTrue: number;
}

/** A data-quality event injected into one live track. */
export interface DemoEvent {
  kind: 'dropout' | 'glitch';
  vignette: string;
  track: string;
  /**
   * dropout: no samples with start <= t < end. glitch: the affected samples are exactly those with
   * start <= t <= end (start and end are their first and last sample times).
   */
  start: number;
  end: number;
  note: string;
}

export interface DemoScenario {
  /** A plain JSON-able event plan. */
  planJson: unknown;
  /** Simulated runs: track ids "sim-001", "sim-002", ... in each vignette. */
  baseline: RawTrack[];
  /** Live runs: track ids "live-1", "live-2", ... in each vignette. */
  live: RawTrack[];
  truth: DemoTruth[];
  events: DemoEvent[];
}

export type DemoErrorCode = 'DEMO_BAD_OPTION' | 'DEMO_UNKNOWN_VIGNETTE';

/** A bad argument to the demo generator. */
export class DemoScenarioError extends RangeError {
  readonly code: DemoErrorCode;
  constructor(code: DemoErrorCode, message: string) {
    super(message);
    this.name = 'DemoScenarioError';
    this.code = code;
  }
}

// ---------------------------------------------------------------------------------------------
// Named constants of the scenario.

export const DEFAULT_SEED = 20261201;
export const DEFAULT_SIMS_PER_VIGNETTE = 200;
export const DEFAULT_LIVE_RUNS_PER_VIGNETTE = 1;
/** Length of a run (s). */
export const HORIZON = 360;

/** Radar sampling and noise. */
export const RADAR_INTERVAL = 0.5;
export const RADAR_INTERVAL_JITTER = 0.1;
export const RADAR_MISS_PROBABILITY = 0.03;
export const RADAR_ANTENNA_HEIGHT = 15;
export const RANGE_NOISE_SD = 8;
export const BEARING_NOISE_SD = 0.4;

/** The data-quality events. */
export const DROPOUT = { vignette: 'S1-L2', track: 'live-1', start: 95, length: 12 } as const;
export const GLITCH = { vignette: 'S2-L3', track: 'live-1', from: 200, samples: 3, offset: 6 } as const;

const DEG = Math.PI / 180;

interface SeaState {
  readonly index: 1 | 2 | 3;
  readonly name: 'low' | 'moderate' | 'high';
  readonly speedLossModel: number;
  readonly speedLossTrue: number;
  readonly speedNoiseSd: number;
  readonly headingNoiseSdDeg: number;
}

const SEA_STATES: readonly SeaState[] = [
  { index: 1, name: 'low', speedLossModel: 0.1, speedLossTrue: 0.1, speedNoiseSd: 0.08, headingNoiseSdDeg: 1 },
  { index: 2, name: 'moderate', speedLossModel: 0.15, speedLossTrue: 0.15, speedNoiseSd: 0.15, headingNoiseSdDeg: 2 },
  { index: 3, name: 'high', speedLossModel: 0.2, speedLossTrue: 0.5, speedNoiseSd: 0.25, headingNoiseSdDeg: 4 },
];

interface Lane {
  readonly index: 1 | 2 | 3;
  /** Courses (deg) and lengths (m) of the transit and the dogleg. */
  readonly transitCourse: number;
  readonly transitLength: number;
  readonly doglegCourse: number;
  readonly doglegLength: number;
}

const LANES: readonly Lane[] = [
  { index: 1, transitCourse: 295, transitLength: 1480, doglegCourse: 265, doglegLength: 460 },
  { index: 2, transitCourse: 290, transitLength: 1480, doglegCourse: 250, doglegLength: 465 },
  { index: 3, transitCourse: 285, transitLength: 1480, doglegCourse: 235, doglegLength: 470 },
];

/** The harbour mouth (range 200 m, bearing 150 deg) and the final leg into it, shared by all lanes. */
const MOUTH_RANGE = 200;
const MOUTH_BEARING = 150;
const FINAL_COURSE = 330;
const FINAL_LENGTH = 560;

interface Vignette {
  readonly id: string;
  readonly sea: SeaState;
  readonly lane: Lane;
  readonly waypoints: readonly [Waypoint, Waypoint, Waypoint, Waypoint];
}

/** The point `length` metres before `to` on a leg of the given course (deg). */
function legStart(to: Waypoint, courseDeg: number, length: number): Waypoint {
  return { east: to.east - length * Math.sin(courseDeg * DEG), north: to.north - length * Math.cos(courseDeg * DEG) };
}

function laneWaypoints(lane: Lane): readonly [Waypoint, Waypoint, Waypoint, Waypoint] {
  const mouth = { east: MOUTH_RANGE * Math.sin(MOUTH_BEARING * DEG), north: MOUTH_RANGE * Math.cos(MOUTH_BEARING * DEG) };
  const finalStart = legStart(mouth, FINAL_COURSE, FINAL_LENGTH);
  const wheelOver = legStart(finalStart, lane.doglegCourse, lane.doglegLength);
  const start = legStart(wheelOver, lane.transitCourse, lane.transitLength);
  return [start, wheelOver, finalStart, mouth];
}

const VIGNETTES: readonly Vignette[] = SEA_STATES.flatMap((sea) =>
  LANES.map((lane) => ({ id: `S${sea.index}-L${lane.index}`, sea, lane, waypoints: laneWaypoints(lane) })),
);

// ---------------------------------------------------------------------------------------------
// Plan.

/** The event plan of the demo, as a plain JSON-able object. */
export function demoPlanJson(): unknown {
  return {
    name: 'Harbour approach trials (invented demo)',
    description:
      'Invented harbour-approach trials of an uncrewed surface vessel (the USV), tracked by the shore radar. ' +
      'Each run is a six-minute approach: a transit at cruise speed, a dogleg turn round the north breakwater, ' +
      'and a slow final leg into the harbour mouth. Vignettes cross three sea states with three approach lanes; ' +
      'the shore radar reports slant range and bearing at about 2 Hz.',
    channels: [
      { name: 'range', unit: 'm', tolerance: 25, maxRate: 40 },
      { name: 'bearing', unit: 'deg', period: 360, tolerance: 1.0, maxRate: 8 },
    ],
    vignettes: VIGNETTES.map((v) => ({
      id: v.id,
      horizon: HORIZON,
      label: `sea state ${v.sea.name}, lane ${v.lane.index}`,
      condition: { seaState: v.sea.name, lane: v.lane.index },
    })),
    analysis: {
      alpha: 0.05,
      components: { varianceFraction: 0.95 },
      gridSize: 128,
      segments: 40,
      combination: 'fisher',
      gapFactor: 6,
    },
  };
}

// ---------------------------------------------------------------------------------------------
// Random streams.

/**
 * 32-bit seed of one track's stream: FNV-1a over "seed|vignette|kind|index" followed by the
 * MurmurHash3 finaliser (fmix32) so that nearby inputs give unrelated seeds.
 */
export function streamSeed(seed: number, vignette: string, kind: 'sim' | 'live', index: number): number {
  const text = `${seed}|${vignette}|${kind}|${index}`;
  let h = 0x811c9dc5;
  for (let i = 0; i < text.length; i++) {
    h ^= text.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

// ---------------------------------------------------------------------------------------------
// Radar.

/** Reduce degrees to [0, 360). */
function mod360(x: number): number {
  const y = x - 360 * Math.floor(x / 360);
  return y >= 360 ? 0 : y;
}

/** Radar samples of one vessel path (see the header). */
function radarTrack(path: VesselPath, rng: Rng, vignette: string, track: string): RawTrack {
  const capacity = Math.floor(HORIZON / (RADAR_INTERVAL - RADAR_INTERVAL_JITTER)) + 1;
  const times = new Float64Array(capacity);
  const ranges = new Float64Array(capacity);
  const bearings = new Float64Array(capacity);
  const height2 = RADAR_ANTENNA_HEIGHT * RADAR_ANTENNA_HEIGHT;
  const last = path.east.length - 1;
  let n = 0;
  for (let t = 0; t <= HORIZON; t += RADAR_INTERVAL + RADAR_INTERVAL_JITTER * (2 * rng.uniform() - 1)) {
    const missed = rng.uniform() < RADAR_MISS_PROBABILITY;
    const rangeNoise = RANGE_NOISE_SD * rng.normal();
    const bearingNoise = BEARING_NOISE_SD * rng.normal();
    if (missed && n > 0) continue; // the first sample, at t = 0, is never missed
    // Linear interpolation of the 0.1 s path.
    const x = t / path.dt;
    const k = Math.min(Math.floor(x), last - 1);
    const w = x - k;
    const east = (1 - w) * path.east[k] + w * path.east[k + 1];
    const north = (1 - w) * path.north[k] + w * path.north[k + 1];
    times[n] = t;
    ranges[n] = Math.sqrt(east * east + north * north + height2) + rangeNoise;
    bearings[n] = mod360(Math.atan2(east, north) / DEG + bearingNoise);
    n += 1;
  }
  return { vignette, track, t: times.slice(0, n), values: [ranges.slice(0, n), bearings.slice(0, n)] };
}

// ---------------------------------------------------------------------------------------------
// Runs.

function findVignette(id: string): Vignette {
  const v = VIGNETTES.find((x) => x.id === id);
  if (v === undefined) {
    throw new DemoScenarioError('DEMO_UNKNOWN_VIGNETTE', `demo: unknown vignette ${JSON.stringify(id)}; expected one of ${VIGNETTES.map((x) => x.id).join(', ')}`);
  }
  return v;
}

function checkSeed(seed: number): void {
  if (!Number.isSafeInteger(seed)) throw new DemoScenarioError('DEMO_BAD_OPTION', `demo: seed must be a safe integer, got ${seed}`);
}

function checkCount(name: string, value: number, min: number): void {
  if (!Number.isSafeInteger(value) || value < min) {
    throw new DemoScenarioError('DEMO_BAD_OPTION', `demo: ${name} must be an integer >= ${min}, got ${value}`);
  }
}

function conditionsOf(v: Vignette, kind: 'sim' | 'live'): ApproachConditions {
  return {
    waypoints: v.waypoints,
    speedLoss: kind === 'sim' ? v.sea.speedLossModel : v.sea.speedLossTrue,
    speedNoiseSd: v.sea.speedNoiseSd,
    headingNoiseSd: v.sea.headingNoiseSdDeg * DEG,
  };
}

/**
 * The motion model's inputs for a vignette: simulated runs use the speed loss the model predicts,
 * live runs the true one.
 */
export function approachConditions(vignette: string, kind: 'sim' | 'live'): ApproachConditions {
  return conditionsOf(findVignette(vignette), kind);
}

/** One run: motion and radar each from their own fork of the track's stream. */
function run(v: Vignette, kind: 'sim' | 'live', index: number, seed: number, track: string): RawTrack {
  const rng = createRng(streamSeed(seed, v.id, kind, index));
  const motionRng = rng.fork();
  const radarRng = rng.fork();
  return radarTrack(simulateApproach(conditionsOf(v, kind), HORIZON, motionRng), radarRng, v.id, track);
}

/**
 * Live run `runIndex` (1, 2, ...; track id "live-<runIndex>") of a vignette, e.g. an extra run later
 * in the event. Deterministic from (vignette, runIndex, seed); never carries a dropout or glitch.
 */
export function generateLiveRun(vignette: string, runIndex: number, seed: number): RawTrack {
  const v = findVignette(vignette);
  checkCount('runIndex', runIndex, 1);
  checkSeed(seed);
  return run(v, 'live', runIndex, seed, `live-${runIndex}`);
}

/** Remove the samples with start <= t < end (all channels). */
function withDropout(track: RawTrack, start: number, end: number): RawTrack {
  const keep: number[] = [];
  for (let i = 0; i < track.t.length; i++) if (track.t[i] < start || track.t[i] >= end) keep.push(i);
  return {
    vignette: track.vignette,
    track: track.track,
    t: Float64Array.from(keep, (i) => track.t[i]),
    values: track.values.map((channel) => Float64Array.from(keep, (i) => channel[i])),
  };
}

/** Add `offset` degrees to the bearing of `count` samples from the first at or after `from`. */
function withBearingGlitch(track: RawTrack, from: number, count: number, offset: number): { track: RawTrack; start: number; end: number } {
  const first = track.t.findIndex((x) => x >= from);
  if (first < 0 || first + count > track.t.length) throw new Error(`demo: no room for a bearing glitch at t = ${from}`);
  const bearing = Float64Array.from(track.values[1]);
  for (let i = first; i < first + count; i++) bearing[i] = mod360(bearing[i] + offset);
  return {
    track: { vignette: track.vignette, track: track.track, t: track.t, values: [track.values[0], bearing] },
    start: track.t[first],
    end: track.t[first + count - 1],
  };
}

/** The whole demo scenario: plan, simulated baseline, live runs, and what is true of them. */
export function generateScenario(options: DemoOptions = {}): DemoScenario {
  const seed = options.seed ?? DEFAULT_SEED;
  const sims = options.simsPerVignette ?? DEFAULT_SIMS_PER_VIGNETTE;
  const lives = options.liveRunsPerVignette ?? DEFAULT_LIVE_RUNS_PER_VIGNETTE;
  checkSeed(seed);
  checkCount('simsPerVignette', sims, 1);
  checkCount('liveRunsPerVignette', lives, 1);

  const baseline: RawTrack[] = [];
  const live: RawTrack[] = [];
  const events: DemoEvent[] = [];
  const simWidth = Math.max(3, String(sims).length);

  for (const v of VIGNETTES) {
    for (let i = 1; i <= sims; i++) baseline.push(run(v, 'sim', i, seed, `sim-${String(i).padStart(simWidth, '0')}`));
    for (let i = 1; i <= lives; i++) {
      let track = run(v, 'live', i, seed, `live-${i}`);
      if (v.id === DROPOUT.vignette && track.track === DROPOUT.track) {
        const end = DROPOUT.start + DROPOUT.length;
        track = withDropout(track, DROPOUT.start, end);
        events.push({
          kind: 'dropout',
          vignette: v.id,
          track: track.track,
          start: DROPOUT.start,
          end,
          note: `radar dropout: no samples for ${DROPOUT.length} s during the transit`,
        });
      }
      if (v.id === GLITCH.vignette && track.track === GLITCH.track) {
        const glitched = withBearingGlitch(track, GLITCH.from, GLITCH.samples, GLITCH.offset);
        track = glitched.track;
        events.push({
          kind: 'glitch',
          vignette: v.id,
          track: track.track,
          start: glitched.start,
          end: glitched.end,
          note: `bearing glitch: ${GLITCH.samples} consecutive samples read ${GLITCH.offset} deg high`,
        });
      }
      live.push(track);
    }
  }

  const truth: DemoTruth[] = VIGNETTES.map((v) => ({
    vignette: v.id,
    disagrees: v.sea.speedLossTrue !== v.sea.speedLossModel,
    speedLossModel: v.sea.speedLossModel,
    speedLossTrue: v.sea.speedLossTrue,
  }));

  return { planJson: demoPlanJson(), baseline, live, truth, events };
}
