/**
 * Tests of the demo scenario generator: determinism, shapes, the radar model (sampling and noise
 * level), the injected data-quality events, and that the live S3 runs really lag the simulation.
 * The expected numbers (8 m, 0.4 deg, 0.5 s, 3 %, the sector) are the scenario's specification,
 * written out here rather than imported so that a change in the generator shows up as a failure.
 */
import { createHash } from 'node:crypto';
import { beforeAll, describe, expect, it } from 'vitest';
import { createRng } from '../../../engine/rng.js';
import type { RawTrack } from '../../../engine/types.js';
import { simulateApproach } from '../../../ingest/demo/motion.js';
import {
  DemoScenarioError,
  approachConditions,
  generateLiveRun,
  generateScenario,
  type DemoScenario,
} from '../../../ingest/demo/scenario.js';

const SEED = 20261201;
const HORIZON = 360;
const VIGNETTES = ['S1-L1', 'S1-L2', 'S1-L3', 'S2-L1', 'S2-L2', 'S2-L3', 'S3-L1', 'S3-L2', 'S3-L3'];
/** Intended sector of the approach (deg) and range span (m), with room for radar noise. */
const BEARING_SECTOR = [100, 160] as const;
const RANGE_SPAN = [240, 2700] as const;
/** A gap this long is a dropout for the analysis (gapFactor 6 x 0.5 s). */
const DROPOUT_GAP = 3;

// ---------------------------------------------------------------------------------------------
// Helpers.

/** SHA-256 of the tracks' ids and bytes, in order. */
function digest(tracks: readonly RawTrack[]): string {
  const hash = createHash('sha256');
  for (const tr of tracks) {
    hash.update(`${tr.vignette}/${tr.track}/${tr.t.length};`);
    hash.update(new Uint8Array(tr.t.buffer, tr.t.byteOffset, tr.t.byteLength));
    for (const channel of tr.values) hash.update(new Uint8Array(channel.buffer, channel.byteOffset, channel.byteLength));
  }
  return hash.digest('hex');
}

function scenarioDigest(s: DemoScenario): string {
  return `${digest(s.baseline)}|${digest(s.live)}|${JSON.stringify([s.planJson, s.truth, s.events])}`;
}

function byVignette(tracks: readonly RawTrack[], vignette: string): RawTrack[] {
  return tracks.filter((tr) => tr.vignette === vignette);
}

function findTrack(tracks: readonly RawTrack[], vignette: string, track: string): RawTrack {
  const found = tracks.find((tr) => tr.vignette === vignette && tr.track === track);
  if (found === undefined) throw new Error(`no track ${vignette}/${track}`);
  return found;
}

function mean(xs: readonly number[]): number {
  return xs.reduce((a, b) => a + b, 0) / xs.length;
}

function sd(xs: readonly number[]): number {
  const m = mean(xs);
  return Math.sqrt(xs.reduce((a, x) => a + (x - m) ** 2, 0) / (xs.length - 1));
}

/**
 * Least-squares polynomial (degree 1 or 2, in t - t0) through the samples of `channel` with
 * |t - t0| <= halfWidth, skipping those with |t - t0| < skip; returns its value at t0.
 */
function localFit(tr: RawTrack, channel: number, t0: number, halfWidth: number, degree: 1 | 2, skip = 0): number {
  const m = degree + 1;
  const ata = Array.from({ length: m }, () => new Array<number>(m).fill(0));
  const atb = new Array<number>(m).fill(0);
  let used = 0;
  for (let i = 0; i < tr.t.length; i++) {
    const x = tr.t[i] - t0;
    if (Math.abs(x) > halfWidth || Math.abs(x) < skip) continue;
    const row = degree === 1 ? [1, x] : [1, x, x * x];
    for (let a = 0; a < m; a++) {
      atb[a] += row[a] * tr.values[channel][i];
      for (let b = 0; b < m; b++) ata[a][b] += row[a] * row[b];
    }
    used += 1;
  }
  if (used < m + 2) throw new Error(`localFit: only ${used} samples near t = ${t0}`);
  // Gaussian elimination on the small normal equations; the constant term is the value at t0.
  for (let c = 0; c < m; c++) {
    for (let r = c + 1; r < m; r++) {
      const f = ata[r][c] / ata[c][c];
      for (let k = c; k < m; k++) ata[r][k] -= f * ata[c][k];
      atb[r] -= f * atb[c];
    }
  }
  const coef = new Array<number>(m).fill(0);
  for (let r = m - 1; r >= 0; r--) {
    let s = atb[r];
    for (let k = r + 1; k < m; k++) s -= ata[r][k] * coef[k];
    coef[r] = s / ata[r][r];
  }
  return coef[0];
}

/**
 * Noise sd of a channel from the residual of each sample against the straight line through its two
 * neighbours: e_i = y_i - (w y_{i-1} + (1 - w) y_{i+1}) has variance sigma^2 (1 + w^2 + (1 - w)^2)
 * when the signal is locally linear. Pairs across gaps longer than 1.5 s are skipped.
 * Returns the sum of squared standardized residuals and their count, to pool over tracks.
 */
function neighbourResiduals(tr: RawTrack, channel: number): { sum: number; count: number } {
  const { t } = tr;
  const y = tr.values[channel];
  let sum = 0;
  let count = 0;
  for (let i = 1; i + 1 < t.length; i++) {
    if (t[i + 1] - t[i - 1] > 1.5) continue;
    const w = (t[i + 1] - t[i]) / (t[i + 1] - t[i - 1]);
    const e = y[i] - (w * y[i - 1] + (1 - w) * y[i + 1]);
    sum += (e * e) / (1 + w * w + (1 - w) * (1 - w));
    count += 1;
  }
  return { sum, count };
}

function pooledNoiseSd(tracks: readonly RawTrack[], channel: number): number {
  let sum = 0;
  let count = 0;
  for (const tr of tracks) {
    const r = neighbourResiduals(tr, channel);
    sum += r.sum;
    count += r.count;
  }
  return Math.sqrt(sum / count);
}

/**
 * Times of bearing samples more than `threshold` degrees off a local quadratic fitted to the
 * samples 1.5..6 s away on either side (so a short cluster of bad samples does not mask itself).
 */
function bearingOutliers(tr: RawTrack, threshold = 4): number[] {
  const out: number[] = [];
  for (let i = 0; i < tr.t.length; i++) {
    const t0 = tr.t[i];
    if (t0 < 6 || t0 > HORIZON - 6) continue;
    if (Math.abs(tr.values[1][i] - localFit(tr, 1, t0, 6, 2, 1.5)) > threshold) out.push(t0);
  }
  return out;
}

function gaps(tr: RawTrack, longerThan: number): { from: number; to: number }[] {
  const out: { from: number; to: number }[] = [];
  for (let i = 1; i < tr.t.length; i++) if (tr.t[i] - tr.t[i - 1] > longerThan) out.push({ from: tr.t[i - 1], to: tr.t[i] });
  return out;
}

/** Range at t = 330 s, from a local straight line through the samples within 5 s. */
function rangeAt330(tr: RawTrack): number {
  return localFit(tr, 0, 330, 5, 1);
}

// ---------------------------------------------------------------------------------------------

let scenario: DemoScenario;
let generationMs = NaN;

beforeAll(() => {
  const started = performance.now();
  scenario = generateScenario();
  generationMs = performance.now() - started;
});

describe('generateScenario: shapes', () => {
  it('has 200 sims and 1 live run per vignette, with the documented ids, by default', () => {
    console.info(`demo scenario (9 x 200 sims + 9 live runs) generated in ${generationMs.toFixed(0)} ms`);
    expect(scenario.baseline).toHaveLength(9 * 200);
    expect(scenario.live).toHaveLength(9);
    for (const v of VIGNETTES) {
      const sims = byVignette(scenario.baseline, v);
      expect(sims.map((tr) => tr.track)).toEqual(Array.from({ length: 200 }, (_, i) => `sim-${String(i + 1).padStart(3, '0')}`));
      expect(byVignette(scenario.live, v).map((tr) => tr.track)).toEqual(['live-1']);
    }
  });

  it('honours simsPerVignette and liveRunsPerVignette', () => {
    const s = generateScenario({ simsPerVignette: 4, liveRunsPerVignette: 3 });
    expect(s.baseline).toHaveLength(9 * 4);
    expect(s.live).toHaveLength(9 * 3);
    expect(byVignette(s.live, 'S2-L2').map((tr) => tr.track)).toEqual(['live-1', 'live-2', 'live-3']);
    expect(byVignette(s.baseline, 'S3-L3').map((tr) => tr.track)).toEqual(['sim-001', 'sim-002', 'sim-003', 'sim-004']);
    // Still exactly one dropout and one glitch, both in live run 1.
    expect(s.events.map((e) => `${e.kind}:${e.vignette}/${e.track}`)).toEqual(['dropout:S1-L2/live-1', 'glitch:S2-L3/live-1']);
  });

  it('states the truth: only the high sea state disagrees, by its speed loss in the turn', () => {
    expect(scenario.truth.map((x) => x.vignette)).toEqual(VIGNETTES);
    for (const x of scenario.truth) {
      const sea = Number(x.vignette[1]);
      expect(x.speedLossModel).toBe([0.1, 0.15, 0.2][sea - 1]);
      expect(x.disagrees).toBe(sea === 3);
      if (sea === 3) expect(x.speedLossTrue).toBeGreaterThanOrEqual(0.45);
      else expect(x.speedLossTrue).toBe(x.speedLossModel);
    }
  });

  it('returns a plain JSON plan with the two channels, nine vignettes and the analysis settings', () => {
    const plan = scenario.planJson;
    expect(JSON.parse(JSON.stringify(plan))).toEqual(plan);
    expect(plan).toMatchObject({
      name: 'Harbour approach trials (invented demo)',
      channels: [
        { name: 'range', unit: 'm', tolerance: 25, maxRate: 40 },
        { name: 'bearing', unit: 'deg', period: 360, tolerance: 1.0, maxRate: 8 },
      ],
      analysis: { alpha: 0.05, components: { varianceFraction: 0.95 }, gridSize: 128, segments: 40, combination: 'fisher', gapFactor: 6 },
    });
    expect(plan).toHaveProperty('description', expect.any(String));
    const vignettes = (plan as { vignettes: { id: string; horizon: number; label: string; condition: unknown }[] }).vignettes;
    expect(vignettes.map((v) => v.id)).toEqual(VIGNETTES);
    expect(vignettes.every((v) => v.horizon === HORIZON)).toBe(true);
    expect(vignettes[0]).toEqual({ id: 'S1-L1', horizon: 360, label: 'sea state low, lane 1', condition: { seaState: 'low', lane: 1 } });
    expect(vignettes[5].condition).toEqual({ seaState: 'moderate', lane: 3 });
    expect(vignettes[7].condition).toEqual({ seaState: 'high', lane: 2 });
  });
});

describe('generateScenario: determinism and independent streams', () => {
  it('gives the same bytes for the same seed, the default seed when none is given, and different bytes for another seed', () => {
    const a = generateScenario({ seed: SEED, simsPerVignette: 5 });
    const b = generateScenario({ seed: SEED, simsPerVignette: 5 });
    const implicit = generateScenario({ simsPerVignette: 5 });
    const other = generateScenario({ seed: SEED + 1, simsPerVignette: 5 });
    expect(scenarioDigest(b)).toBe(scenarioDigest(a));
    expect(scenarioDigest(implicit)).toBe(scenarioDigest(a));
    expect(digest(other.baseline)).not.toBe(digest(a.baseline));
    expect(digest(other.live)).not.toBe(digest(a.live));
  });

  it('keeps the baseline and live run 1 unchanged when more live runs or sims are asked for', () => {
    const one = generateScenario({ simsPerVignette: 5, liveRunsPerVignette: 1 });
    const three = generateScenario({ simsPerVignette: 5, liveRunsPerVignette: 3 });
    expect(digest(three.baseline)).toBe(digest(one.baseline));
    expect(digest(three.live.filter((tr) => tr.track === 'live-1'))).toBe(digest(one.live));
    // The first 5 sims of the default scenario are the same 5 sims.
    const defaultFirstFive = VIGNETTES.flatMap((v) => byVignette(scenario.baseline, v).slice(0, 5));
    expect(digest(defaultFirstFive)).toBe(digest(one.baseline));
  });

  it('gives different tracks to different replicates', () => {
    const sims = byVignette(scenario.baseline, 'S2-L2');
    expect(new Set(sims.map((tr) => digest([{ ...tr, track: '' }]))).size).toBe(sims.length);
  });

  it('generateLiveRun reproduces live run k, without the data-quality events', () => {
    const s = generateScenario({ simsPerVignette: 1, liveRunsPerVignette: 2 });
    for (const tr of s.live) {
      const again = generateLiveRun(tr.vignette, Number(tr.track.slice('live-'.length)), SEED);
      expect(again.track).toBe(tr.track);
      if (`${tr.vignette}/${tr.track}` === 'S1-L2/live-1') {
        // The scenario's copy is the clean run with [95, 107) cut out.
        const keep = Array.from(again.t.keys()).filter((i) => again.t[i] < 95 || again.t[i] >= 107);
        expect(Array.from(tr.t)).toEqual(keep.map((i) => again.t[i]));
        expect(Array.from(tr.values[0])).toEqual(keep.map((i) => again.values[0][i]));
      } else if (`${tr.vignette}/${tr.track}` === 'S2-L3/live-1') {
        expect(Array.from(tr.t)).toEqual(Array.from(again.t));
        const changed = Array.from(tr.t.keys()).filter((i) => tr.values[1][i] !== again.values[1][i]);
        expect(changed).toHaveLength(3);
        expect(Array.from(tr.values[0])).toEqual(Array.from(again.values[0]));
      } else {
        expect(digest([again])).toBe(digest([tr]));
      }
    }
    expect(digest([generateLiveRun('S3-L1', 7, SEED)])).toBe(digest([generateLiveRun('S3-L1', 7, SEED)]));
    expect(digest([generateLiveRun('S3-L1', 7, SEED)])).not.toBe(digest([generateLiveRun('S3-L1', 8, SEED)]));
  });

  it('rejects bad arguments with a coded error', () => {
    const codeOf = (f: () => unknown): string | undefined => {
      try {
        f();
      } catch (e) {
        return e instanceof DemoScenarioError ? e.code : `not a DemoScenarioError: ${String(e)}`;
      }
      return undefined;
    };
    expect(codeOf(() => generateLiveRun('S4-L1', 1, SEED))).toBe('DEMO_UNKNOWN_VIGNETTE');
    expect(codeOf(() => generateLiveRun('S1-L1', 0, SEED))).toBe('DEMO_BAD_OPTION');
    expect(codeOf(() => generateLiveRun('S1-L1', 1.5, SEED))).toBe('DEMO_BAD_OPTION');
    expect(codeOf(() => generateLiveRun('S1-L1', 1, Number.NaN))).toBe('DEMO_BAD_OPTION');
    expect(codeOf(() => generateScenario({ simsPerVignette: 0 }))).toBe('DEMO_BAD_OPTION');
    expect(codeOf(() => generateScenario({ liveRunsPerVignette: -1 }))).toBe('DEMO_BAD_OPTION');
    expect(codeOf(() => generateScenario({ seed: 1.25, simsPerVignette: 1 }))).toBe('DEMO_BAD_OPTION');
  });
});

describe('generateScenario: radar samples', () => {
  it('starts every track at t = 0, keeps t strictly increasing up to the horizon, and all values finite', () => {
    for (const tr of [...scenario.baseline, ...scenario.live]) {
      const { t, values } = tr;
      expect(values).toHaveLength(2);
      expect(values[0]).toHaveLength(t.length);
      expect(values[1]).toHaveLength(t.length);
      expect(t[0]).toBe(0);
      expect(t[t.length - 1]).toBeLessThanOrEqual(HORIZON);
      expect(t[t.length - 1]).toBeGreaterThan(HORIZON - 2);
      for (let i = 1; i < t.length; i++) {
        if (!(t[i] > t[i - 1])) throw new Error(`${tr.vignette}/${tr.track}: t[${i}] = ${t[i]} after ${t[i - 1]}`);
      }
      for (const channel of values) {
        for (const x of channel) if (!Number.isFinite(x)) throw new Error(`${tr.vignette}/${tr.track}: non-finite value`);
      }
    }
  });

  it('keeps bearings in [0, 360) and inside the south-east sector, and ranges in the approach span', () => {
    let bearingMin = Infinity;
    let bearingMax = -Infinity;
    let rangeMin = Infinity;
    let rangeMax = -Infinity;
    for (const tr of [...scenario.baseline, ...scenario.live]) {
      for (const b of tr.values[1]) {
        bearingMin = Math.min(bearingMin, b);
        bearingMax = Math.max(bearingMax, b);
      }
      for (const r of tr.values[0]) {
        rangeMin = Math.min(rangeMin, r);
        rangeMax = Math.max(rangeMax, r);
      }
    }
    expect(bearingMin).toBeGreaterThanOrEqual(BEARING_SECTOR[0]);
    expect(bearingMax).toBeLessThanOrEqual(BEARING_SECTOR[1]);
    expect(rangeMin).toBeGreaterThanOrEqual(RANGE_SPAN[0]);
    expect(rangeMax).toBeLessThanOrEqual(RANGE_SPAN[1]);
    // The sector is used, not just respected: the approach sweeps tens of degrees and kilometres.
    expect(bearingMax - bearingMin).toBeGreaterThan(30);
    expect(rangeMax - rangeMin).toBeGreaterThan(1500);
  });

  it('samples at 0.5 s +- 0.1 s and misses about 3 % of the samples', () => {
    let kept = 0;
    let scheduled = 0;
    let shortest = Infinity;
    for (const tr of scenario.baseline) {
      const dt = Array.from(tr.t.keys()).slice(1).map((i) => tr.t[i] - tr.t[i - 1]);
      shortest = Math.min(shortest, ...dt);
      const sorted = [...dt].sort((a, b) => a - b);
      expect(sorted[Math.floor(sorted.length / 2)]).toBeCloseTo(0.5, 1);
      kept += tr.t.length;
      scheduled += HORIZON / 0.5 + 1;
    }
    expect(shortest).toBeGreaterThanOrEqual(0.4 - 1e-9);
    const missed = 1 - kept / scheduled;
    expect(missed).toBeGreaterThan(0.027);
    expect(missed).toBeLessThan(0.033);
  });

  it('has range noise of sd 8 m and bearing noise of sd 0.4 deg (within 6 %)', () => {
    const clean = scenario.live.filter((tr) => !scenario.events.some((e) => e.vignette === tr.vignette && e.track === tr.track));
    expect(clean).toHaveLength(7);
    const sims = VIGNETTES.flatMap((v) => byVignette(scenario.baseline, v).slice(0, 10));
    for (const tracks of [clean, sims]) {
      const rangeSd = pooledNoiseSd(tracks, 0);
      const bearingSd = pooledNoiseSd(tracks, 1);
      expect(Math.abs(rangeSd - 8) / 8, `range noise sd ${rangeSd}`).toBeLessThan(0.06);
      expect(Math.abs(bearingSd - 0.4) / 0.4, `bearing noise sd ${bearingSd}`).toBeLessThan(0.06);
    }
    // A single clean live run already tells 8 m from, say, 6 or 10 m.
    const one = pooledNoiseSd([findTrack(scenario.live, 'S3-L2', 'live-1')], 0);
    expect(Math.abs(one - 8), `range noise sd of S3-L2/live-1: ${one}`).toBeLessThan(0.8);
  });
});

describe('generateScenario: data-quality events', () => {
  it('has a 12 s dropout in S1-L2 live-1 during the transit, and no other gap', () => {
    const dropouts = scenario.events.filter((e) => e.kind === 'dropout');
    expect(dropouts).toHaveLength(1);
    const [d] = dropouts;
    expect(d).toMatchObject({ vignette: 'S1-L2', track: 'live-1', start: 95, end: 107 });
    expect(d.note.length).toBeGreaterThan(0);
    const tr = findTrack(scenario.live, d.vignette, d.track);
    expect(Array.from(tr.t).filter((x) => x >= d.start && x < d.end)).toEqual([]);
    const found = gaps(tr, DROPOUT_GAP);
    expect(found).toHaveLength(1);
    expect(found[0].from).toBeLessThan(d.start);
    expect(found[0].from).toBeGreaterThan(d.start - 1.5);
    expect(found[0].to).toBeGreaterThanOrEqual(d.end);
    expect(found[0].to).toBeLessThan(d.end + 1.5);
    for (const other of [...scenario.baseline, ...scenario.live]) {
      if (other === tr) continue;
      if (gaps(other, DROPOUT_GAP).length > 0) throw new Error(`unexpected gap in ${other.vignette}/${other.track}`);
    }
  });

  it('has a 3-sample +6 deg bearing glitch in S2-L3 live-1 near t = 200 s, and no other outlier', () => {
    const glitches = scenario.events.filter((e) => e.kind === 'glitch');
    expect(glitches).toHaveLength(1);
    const [g] = glitches;
    expect(g).toMatchObject({ vignette: 'S2-L3', track: 'live-1' });
    expect(g.start).toBeGreaterThanOrEqual(200);
    expect(g.start).toBeLessThan(201);
    const tr = findTrack(scenario.live, g.vignette, g.track);
    const inside = Array.from(tr.t.keys()).filter((i) => tr.t[i] >= g.start && tr.t[i] <= g.end);
    expect(inside).toHaveLength(3);
    // The outliers are exactly the samples the event names, and they read about 6 deg high.
    expect(bearingOutliers(tr)).toEqual(inside.map((i) => tr.t[i]));
    for (const i of inside) {
      const offset = tr.values[1][i] - localFit(tr, 1, tr.t[i], 6, 2, 1.5);
      expect(offset).toBeGreaterThan(4.5);
      expect(offset).toBeLessThan(7.5);
    }
    for (const other of [...scenario.live, ...VIGNETTES.map((v) => byVignette(scenario.baseline, v)[0])]) {
      if (other === tr) continue;
      expect(bearingOutliers(other), `${other.vignette}/${other.track}`).toEqual([]);
    }
  });
});

describe('motion model', () => {
  it('starts the turn at about t = 150..180 s and ends it at about 220..240 s; live S3 ends it much later', () => {
    const phases = (vignette: string, kind: 'sim' | 'live'): { starts: number[]; ends: number[] } => {
      const starts: number[] = [];
      const ends: number[] = [];
      for (let i = 0; i < 100; i++) {
        const path = simulateApproach(approachConditions(vignette, kind), HORIZON, createRng(7000 + i));
        starts.push(path.turnStart);
        ends.push(path.turnEnd);
      }
      return { starts, ends };
    };
    for (const v of VIGNETTES) {
      const { starts, ends } = phases(v, 'sim');
      const summary = `${v}: turn ${mean(starts).toFixed(1)} (sd ${sd(starts).toFixed(1)}) .. ${mean(ends).toFixed(1)} s`;
      expect(mean(starts), summary).toBeGreaterThan(150);
      expect(mean(starts), summary).toBeLessThan(180);
      expect(mean(ends), summary).toBeGreaterThan(220);
      expect(mean(ends), summary).toBeLessThan(240);
      // Turn timing varies by several seconds between replicates (lead-time jitter 4 s and cruise speed).
      expect(sd(starts), summary).toBeGreaterThan(4);
      expect(sd(starts), summary).toBeLessThan(10);
      if (v.startsWith('S3')) expect(mean(phases(v, 'live').ends) - mean(ends), v).toBeGreaterThan(25);
      else expect(phases(v, 'live').ends, v).toEqual(ends); // S1, S2: live and simulated are the same model
    }
  });
});

describe('generateScenario: the disagreement', () => {
  /** Per vignette: (live range at 330 s - simulated mean) and the simulated sd. */
  function lagAt330(v: string, liveTracks: readonly RawTrack[]): { lag: number; simSd: number } {
    const sims = byVignette(scenario.baseline, v).map(rangeAt330);
    const simMean = mean(sims);
    return { lag: mean(liveTracks.map(rangeAt330)) - simMean, simSd: sd(sims) };
  }

  /** Mean lag over the three lanes of a sea state, and the lanes' root-mean-square simulated sd. */
  function seaStateLag(sea: 1 | 2 | 3, live: (v: string) => RawTrack[]): { lag: number; simSd: number } {
    const perLane = [1, 2, 3].map((lane) => lagAt330(`S${sea}-L${lane}`, live(`S${sea}-L${lane}`)));
    return { lag: mean(perLane.map((x) => x.lag)), simSd: Math.sqrt(mean(perLane.map((x) => x.simSd ** 2))) };
  }

  it('live S3 runs are far behind the simulation at t = 330 s (range much larger); S1 and S2 are not', () => {
    const live = (v: string): RawTrack[] => byVignette(scenario.live, v);
    const [s1, s2, s3] = ([1, 2, 3] as const).map((sea) => seaStateLag(sea, live));
    const report = `S1 ${s1.lag.toFixed(1)}/${s1.simSd.toFixed(1)} m, S2 ${s2.lag.toFixed(1)}/${s2.simSd.toFixed(1)} m, S3 ${s3.lag.toFixed(1)}/${s3.simSd.toFixed(1)} m`;
    expect(s3.lag, report).toBeGreaterThan(3 * s3.simSd);
    expect(Math.abs(s1.lag), report).toBeLessThan(2 * s1.simSd);
    expect(Math.abs(s2.lag), report).toBeLessThan(2 * s2.simSd);
    // Each S3 lane on its own lags too.
    for (const v of ['S3-L1', 'S3-L2', 'S3-L3']) {
      const { lag, simSd } = lagAt330(v, live(v));
      expect(lag, v).toBeGreaterThan(2 * simSd);
    }
  });

  it('extra live runs from generateLiveRun follow the same truth', () => {
    const extra = (v: string): RawTrack[] => [2, 3, 4, 5].map((k) => generateLiveRun(v, k, SEED));
    const s3 = lagAt330('S3-L2', extra('S3-L2'));
    const s1 = lagAt330('S1-L2', extra('S1-L2'));
    expect(s3.lag).toBeGreaterThan(3 * s3.simSd);
    expect(Math.abs(s1.lag)).toBeLessThan(2 * s1.simSd);
  });
});
