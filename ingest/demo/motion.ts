/**
 * Kinematic motion model of the invented demo vessel ("the USV") on a harbour approach. This is the
 * "simulation" of the demo scenario; `scenario.ts` adds the radar and the live/simulated split.
 *
 * Frame: local east/north in metres, shore radar at the origin; headings in radians clockwise from
 * north, so the unit vector of heading psi is (sin psi, cos psi).
 *
 * Path: four waypoints W0 (start) -> W1 (wheel-over round the breakwater end) -> W2 (end of the
 * dogleg) -> W3 (harbour mouth). Leg 0 is the transit, leg 1 the dogleg ("the turn"), leg 2 the
 * final leg. The active leg switches at the wheel-over point: when the distance still to go along
 * the leg is at most speed x lead time (T. I. Fossen, "Handbook of Marine Craft Hydrodynamics and
 * Motion Control", 2nd ed., Wiley 2021, doi:10.1002/9781119575030, chapter on guidance systems).
 *
 * Guidance and dynamics, integrated at DT = 0.1 s by semi-implicit Euler (heading first, then the
 * position with the new heading, then the speed command):
 *   commanded course   chi = legCourse - atan(crossTrack / LOOKAHEAD)   (line-of-sight steering,
 *                      crossTrack positive to starboard of the leg; Fossen, same chapter)
 *   heading            dpsi/dt = clamp(wrap(chi + w_psi - psi) / HEADING_TAU, +-MAX_TURN_RATE)
 *   speed              du_c/dt = (target - u_c) / SPEED_TAU,  u = u_c + w_u
 *   position           de/dt = u sin psi,  dn/dt = u cos psi
 * with target speed = cruise on leg 0, cruise x (1 - speedLoss) on leg 1, FINAL_SPEED on leg 2, and
 * u floored at 0. (sin psi, cos psi) is advanced by an exact rotation through each step's turn angle
 * rather than by calling sin and cos every step.
 * w_u (speed fluctuation) and w_psi (heading wander) are Ornstein-Uhlenbeck processes, started from
 * their stationary law and stepped exactly every NOISE_STEP = 0.5 s, x <- a x + sd sqrt(1 - a^2) z
 * with a = exp(-NOISE_STEP / tau), and held constant in between (a zero-order-hold disturbance input;
 * the correlation times, 5 s and 20 s, are long against the hold).
 *
 * Per replicate (drawn from the caller's rng, in this order): start position jitter (N(0, 15 m) east
 * and north), cruise speed N(8.5, 0.3) m/s, wheel-over lead time of the turn N(8, 4) s. The lead time
 * may come out negative: the turn then starts after the waypoint is passed (a late wheel-over).
 */
import type { Rng } from '../../engine/rng.js';

/** Integration step (s). */
export const DT = 0.1;
/** Nominal cruise speed in the transit (m/s) and its replicate-to-replicate sd. */
export const CRUISE_SPEED = 8.5;
export const CRUISE_SPEED_SD = 0.3;
/** Target speed on the final leg into the harbour mouth (m/s). */
export const FINAL_SPEED = 3;
/** Start position jitter, sd per axis (m). */
export const START_JITTER_SD = 15;
/** Wheel-over lead time of the turn (start of the dogleg), mean and sd (s). */
export const TURN_LEAD = 8;
export const TURN_LEAD_SD = 4;
/** Wheel-over lead time at the end of the dogleg (s), not randomised. */
export const FINAL_LEAD = 6;
/** First-order heading response time constant (s) and turn-rate limit (rad/s). */
export const HEADING_TAU = 4;
export const MAX_TURN_RATE = (6 * Math.PI) / 180;
/** First-order speed response time constant (s). */
export const SPEED_TAU = 8;
/** Line-of-sight lookahead distance (m). */
export const LOOKAHEAD = 100;
/** Disturbances are sampled every NOISE_STEP seconds (a whole number of integration steps). */
export const NOISE_STEP = 0.5;
/** Correlation times of the speed fluctuation and the heading wander (s). */
export const SPEED_NOISE_TAU = 5;
export const HEADING_NOISE_TAU = 20;

export interface Waypoint {
  readonly east: number;
  readonly north: number;
}

/** What a run depends on apart from its random draws. */
export interface ApproachConditions {
  /** W0, W1, W2, W3 (see the header). */
  readonly waypoints: readonly [Waypoint, Waypoint, Waypoint, Waypoint];
  /** Fraction of cruise speed lost on the dogleg, in [0, 1). */
  readonly speedLoss: number;
  /** Stationary sd of the speed fluctuation (m/s). */
  readonly speedNoiseSd: number;
  /** Stationary sd of the heading wander (rad). */
  readonly headingNoiseSd: number;
}

/** The vessel's position every DT seconds from 0 to the horizon, and when the phases began. */
export interface VesselPath {
  readonly dt: number;
  readonly east: Float64Array;
  readonly north: Float64Array;
  /** Time of the wheel-over into the dogleg (s); NaN if it did not happen before the horizon. */
  readonly turnStart: number;
  /** Time of the wheel-over into the final leg (s); NaN if it did not happen before the horizon. */
  readonly turnEnd: number;
}

/** Course (rad, clockwise from north) from a to b. */
export function courseBetween(a: Waypoint, b: Waypoint): number {
  return Math.atan2(b.east - a.east, b.north - a.north);
}

/** Representative of an angle in (-pi, pi]; the common case (already inside) costs two compares. */
function wrapPi(x: number): number {
  if (x > -Math.PI && x <= Math.PI) return x;
  let y = x - 2 * Math.PI * Math.round(x / (2 * Math.PI));
  if (y <= -Math.PI) y += 2 * Math.PI;
  return y;
}

interface Leg {
  readonly from: Waypoint;
  readonly course: number;
  readonly length: number;
  /** Unit vectors along the leg and to its starboard side. */
  readonly alongE: number;
  readonly alongN: number;
  readonly starE: number;
  readonly starN: number;
}

function makeLeg(from: Waypoint, to: Waypoint): Leg {
  const course = courseBetween(from, to);
  const alongE = Math.sin(course);
  const alongN = Math.cos(course);
  return {
    from,
    course,
    length: Math.hypot(to.east - from.east, to.north - from.north),
    alongE,
    alongN,
    starE: alongN,
    starN: -alongE,
  };
}

/**
 * One replicate of the approach over [0, horizon]: draws the replicate's variations and the noise
 * processes from `rng` and integrates the model in the header.
 */
export function simulateApproach(conditions: ApproachConditions, horizon: number, rng: Rng): VesselPath {
  if (!(horizon > 0) || !Number.isFinite(horizon)) {
    throw new RangeError(`simulateApproach: horizon must be a positive finite number, got ${horizon}`);
  }
  const { waypoints, speedLoss, speedNoiseSd, headingNoiseSd } = conditions;
  if (!(speedLoss >= 0 && speedLoss < 1)) {
    throw new RangeError(`simulateApproach: speedLoss must be in [0, 1), got ${speedLoss}`);
  }
  const legs = [makeLeg(waypoints[0], waypoints[1]), makeLeg(waypoints[1], waypoints[2]), makeLeg(waypoints[2], waypoints[3])];

  // Replicate draws.
  let east = waypoints[0].east + START_JITTER_SD * rng.normal();
  let north = waypoints[0].north + START_JITTER_SD * rng.normal();
  const cruise = CRUISE_SPEED + CRUISE_SPEED_SD * rng.normal();
  const leads = [TURN_LEAD + TURN_LEAD_SD * rng.normal(), FINAL_LEAD]; // wheel-over lead times (s)
  const targets = [cruise, cruise * (1 - speedLoss), FINAL_SPEED];

  // Ornstein-Uhlenbeck processes from their stationary law.
  const noiseEvery = Math.round(NOISE_STEP / DT);
  const aSpeed = Math.exp(-NOISE_STEP / SPEED_NOISE_TAU);
  const aHeading = Math.exp(-NOISE_STEP / HEADING_NOISE_TAU);
  const kSpeed = speedNoiseSd * Math.sqrt(1 - aSpeed * aSpeed);
  const kHeading = headingNoiseSd * Math.sqrt(1 - aHeading * aHeading);
  let wSpeed = speedNoiseSd * rng.normal();
  let wHeading = headingNoiseSd * rng.normal();

  let leg = 0;
  let heading = legs[0].course;
  // (sin, cos) of the heading, advanced by rotation below instead of calling sin and cos each step.
  let sinHeading = Math.sin(heading);
  let cosHeading = Math.cos(heading);
  let speedCommand = cruise;
  const switchTimes = [NaN, NaN];

  const steps = Math.floor(horizon / DT + 1e-9);
  const eastOut = new Float64Array(steps + 1);
  const northOut = new Float64Array(steps + 1);
  eastOut[0] = east;
  northOut[0] = north;

  for (let k = 1; k <= steps; k++) {
    const speed = Math.max(0, speedCommand + wSpeed);
    // Wheel-over: switch to the next leg once the distance to go is within speed x lead.
    const current = legs[leg];
    const along = (east - current.from.east) * current.alongE + (north - current.from.north) * current.alongN;
    if (leg < 2 && current.length - along <= speed * leads[leg]) {
      switchTimes[leg] = (k - 1) * DT;
      leg += 1;
    }
    const l = legs[leg];
    const cross = (east - l.from.east) * l.starE + (north - l.from.north) * l.starN;
    const commanded = l.course - Math.atan(cross / LOOKAHEAD);
    const rate = wrapPi(commanded + wHeading - heading) / HEADING_TAU;
    const turn = DT * Math.min(MAX_TURN_RATE, Math.max(-MAX_TURN_RATE, rate));
    heading += turn;
    // Rotate (sin, cos) by `turn`; |turn| <= MAX_TURN_RATE x DT = 0.0105 rad, so the Taylor
    // polynomials below match sin(turn) and cos(turn) to better than 1e-17.
    const turn2 = turn * turn;
    const sinTurn = turn * (1 - (turn2 / 6) * (1 - turn2 / 20));
    const cosTurn = 1 - (turn2 / 2) * (1 - (turn2 / 12) * (1 - turn2 / 30));
    const sinNext = sinHeading * cosTurn + cosHeading * sinTurn;
    cosHeading = cosHeading * cosTurn - sinHeading * sinTurn;
    sinHeading = sinNext;
    east += DT * speed * sinHeading;
    north += DT * speed * cosHeading;
    speedCommand += (DT * (targets[leg] - speedCommand)) / SPEED_TAU;
    if (k % noiseEvery === 0) {
      wSpeed = aSpeed * wSpeed + kSpeed * rng.normal();
      wHeading = aHeading * wHeading + kHeading * rng.normal();
    }
    eastOut[k] = east;
    northOut[k] = north;
  }
  return { dt: DT, east: eastOut, north: northOut, turnStart: switchTimes[0], turnEnd: switchTimes[1] };
}
