/**
 * Data-quality flags on live tracks (engine/quality.ts): the demo scenario's two injected events are
 * found and its clean tracks raise nothing; one unit test per flag kind; the dropout flags agree with
 * the batch gap rule of engine/grid.ts; reorderings within the tolerance give the same flags.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { observedWindow } from '../../engine/grid.js';
import { closeTrack, initialQuality, observePoint, type QualityChannel, type QualityFlag, type QualityOptions, type QualityPoint, type QualityState } from '../../engine/quality.js';
import { createRng } from '../../engine/rng.js';
import type { RawTrack } from '../../engine/types.js';
import { DROPOUT, GLITCH, HORIZON, demoPlanJson, generateLiveRun, generateScenario } from '../../ingest/demo/scenario.js';
import { parsePlan } from '../../ingest/plan.js';

/** Feed points in the given order and close the track; all flags in the order raised. */
function flagsOf(points: readonly QualityPoint[], options: QualityOptions, horizon: number): QualityFlag[] {
  let state = initialQuality(options);
  const flags: QualityFlag[] = [];
  for (const p of points) {
    const r = observePoint(state, p);
    state = r.state;
    flags.push(...r.flags);
  }
  return [...flags, ...closeTrack(state, horizon)];
}

function pointsOf(track: RawTrack): QualityPoint[] {
  return Array.from(track.t, (t, i) => ({ seq: i, t, values: track.values.map((v) => v[i]) }));
}

describe('the demo scenario (ingest/demo/scenario.ts, plan channels with maxRate)', () => {
  const plan = parsePlan(JSON.stringify(demoPlanJson()), 'demo.json');
  const options: QualityOptions = { channels: plan.channels };
  const scenario = generateScenario({ simsPerVignette: 23 });
  const flagsOfTrack = (t: RawTrack): QualityFlag[] => flagsOf(pointsOf(t), options, HORIZON);
  const VIGNETTES_OF_DEMO = [...new Set(scenario.live.map((t) => t.vignette))];

  it('flags the 12 s dropout of S1-L2 live-1 once, from the last sample before it to the first after it', () => {
    const track = scenario.live.find((t) => t.vignette === DROPOUT.vignette && t.track === DROPOUT.track)!;
    const flags = flagsOfTrack(track);
    expect(flags.map((f) => f.kind)).toEqual(['dropout']);
    const before = track.t.filter((t) => t < DROPOUT.start).at(-1)!;
    const after = track.t.find((t) => t >= DROPOUT.start + DROPOUT.length)!;
    expect(flags[0].t).toBe(before);
    expect(flags[0].tEnd).toBe(after);
  });

  it('flags the bearing glitch of S2-L3 live-1 once, as a jump on the bearing spanning its three samples', () => {
    const track = scenario.live.find((t) => t.vignette === GLITCH.vignette && t.track === GLITCH.track)!;
    const event = scenario.events.find((e) => e.kind === 'glitch')!;
    const flags = flagsOfTrack(track);
    expect(flags).toHaveLength(1);
    expect(flags[0]).toMatchObject({ kind: 'jump', channel: 1, channelName: 'bearing', t: event.start, tEnd: event.end });
    expect(flags[0].detail).toMatch(/3 samples/);
  });

  it('raises nothing on the other live runs and on 207 clean simulated runs (false-flag rate)', () => {
    const clean = scenario.live.filter((t) => t.track !== 'live-1' || (t.vignette !== DROPOUT.vignette && t.vignette !== GLITCH.vignette));
    expect(clean).toHaveLength(7);
    let samples = 0;
    const raised: string[] = [];
    for (const track of [...clean, ...scenario.baseline]) {
      samples += track.t.length;
      for (const f of flagsOfTrack(track)) raised.push(`${track.vignette}/${track.track}: ${f.kind} ${f.detail}`);
    }
    // Zero events in n tracks: the 95 % upper bound of the per-track rate is about 3/n ("rule of
    // three", Hanley & Lippman-Hand, JAMA 249:1743–1745, 1983).
    const n = clean.length + scenario.baseline.length;
    console.info(`quality: ${raised.length} flags on ${n} clean tracks (${samples} samples); 95 % upper bound of the per-track rate ${(3 / n).toFixed(3)}`);
    expect(raised).toEqual([]);
  });

  it('finds a 3-sample +6 deg bearing glitch injected at a random time (t in [30, 340] s) into 60 fresh live runs', () => {
    const rng = createRng(61);
    let found = 0;
    let other = 0;
    for (let k = 0; k < 60; k++) {
      const track = generateLiveRun(VIGNETTES_OF_DEMO[k % VIGNETTES_OF_DEMO.length], 10 + k, 20261201);
      const first = track.t.findIndex((t) => t >= 30 + 310 * rng.uniform());
      const bearing = Float64Array.from(track.values[1], (b, i) => (i >= first && i < first + 3 ? b + 6 : b));
      const flags = flagsOfTrack({ ...track, values: [track.values[0], bearing] });
      const hit = (f: QualityFlag) => f.kind === 'jump' && f.channel === 1 && f.t <= track.t[first + 2] && (f.tEnd ?? f.t) >= track.t[first];
      if (flags.some(hit)) found++;
      other += flags.filter((f) => !hit(f)).length;
    }
    console.info(`quality: injected 6-deg bearing glitches found in ${found} of 60 runs; ${other} other flags`);
    expect(found).toBeGreaterThanOrEqual(57);
    expect(other).toBe(0);
  });

  it('dropout flags agree with the batch gap rule (engine/grid.ts observedWindow, same gap factor)', () => {
    for (const track of [...scenario.live, ...scenario.baseline.slice(0, 20)]) {
      const batch = observedWindow(track.t, HORIZON, plan.analysis.gapFactor, 1e-6).gaps;
      const streamed = flagsOfTrack(track).filter((f) => f.kind === 'dropout').map((f) => [f.t, f.tEnd]);
      expect(streamed, `${track.vignette}/${track.track}`).toEqual(batch.map(([a, b]) => [a, b]));
    }
  });
});

/** A regular 2 Hz track of `n` points: channel 0 = 5 t + N(0, 1) with maxRate 10. */
function regular(n: number, seed = 1): { t: number[]; y: number[] } {
  const rng = createRng(seed);
  const t = Array.from({ length: n }, (_, i) => 0.5 * i + 0.05 * rng.uniform());
  return { t, y: t.map((s) => 5 * s + rng.normal()) };
}
const one: QualityChannel[] = [{ name: 'x', maxRate: 10 }];
const single = (t: number[], y: number[]): QualityPoint[] => t.map((s, i) => ({ seq: i, t: s, values: [y[i]] }));
const kinds = (flags: readonly QualityFlag[]): string[] => flags.map((f) => f.kind);

describe('one flag kind at a time', () => {
  it('dropout: a 5 s hole in a 0.5 s track is one flag; a 2 s hole (4 intervals, under the factor 6) is none', () => {
    const { t, y } = regular(200);
    const keep = (a: number, b: number) => t.map((s, i) => [s, y[i]] as const).filter(([s]) => s < a || s >= b);
    const long = keep(40, 45);
    const flags = flagsOf(single(long.map((p) => p[0]), long.map((p) => p[1])), { channels: one }, 100);
    expect(kinds(flags)).toEqual(['dropout']);
    expect(flags[0].tEnd! - flags[0].t).toBeGreaterThan(5);
    const short = keep(40, 42);
    expect(flagsOf(single(short.map((p) => p[0]), short.map((p) => p[1])), { channels: one }, 100)).toEqual([]);
  });

  it('dropout during the warm-up is still flagged once the nominal interval is known', () => {
    const { t, y } = regular(200);
    const kept = t.map((s, i) => [s, y[i]] as const).filter(([s]) => s < 1.2 || s >= 6);
    expect(kinds(flagsOf(single(kept.map((p) => p[0]), kept.map((p) => p[1])), { channels: one }, 100))).toEqual(['dropout']);
  });

  it('time-reversal: a burst of 3 points 8 s behind is one flag and is left out of the checks; 3 s behind is accepted', () => {
    const { t, y } = regular(200);
    const points = single(t, y);
    const late = points.slice(100, 103);
    const order = [...points.slice(0, 100), ...points.slice(103, 119), ...late, ...points.slice(119)];
    const flags = flagsOf(order, { channels: one }, 100);
    expect(kinds(flags)).toEqual(['time-reversal']);
    expect(flags[0]).toMatchObject({ t: late[0].t, tEnd: late[2].t });
    expect(flags[0].detail).toMatch(/3 points/);
    const slightly = [...points.slice(0, 100), ...points.slice(103, 109), ...late, ...points.slice(109)];
    expect(flagsOf(slightly, { channels: one }, 100)).toEqual([]);
  });

  it('jump: a single +30 spike (maxRate 10/s, noise sd 1) is one flag at the spike', () => {
    const { t, y } = regular(200);
    y[120] += 30;
    const flags = flagsOf(single(t, y), { channels: one }, 100);
    expect(flags).toHaveLength(1);
    expect(flags[0]).toMatchObject({ kind: 'jump', t: t[120], channel: 0, channelName: 'x' });
    expect(flags[0].tEnd).toBeUndefined();
  });

  it('jump: no check without a maxRate', () => {
    const { t, y } = regular(200);
    y[120] += 30;
    expect(flagsOf(single(t, y), { channels: [{ name: 'x' }] }, 100)).toEqual([]);
  });

  it('jump: a real manoeuvre within the rate bound (rate 5 → −9 units/s, acceleration up to 0.7 units/s²) is not flagged', () => {
    const { t } = regular(200);
    const rng = createRng(2);
    // rate(s) = −2 − 7 tanh((s − 50)/10), integrated.
    const y = t.map((s) => -2 * s - 70 * Math.log(Math.cosh((s - 50) / 10)) + rng.normal());
    expect(flagsOf(single(t, y), { channels: one }, 100)).toEqual([]);
  });

  it('jump: a persistent step is one flag after maxJumpSamples, and the check restarts at the new level', () => {
    const { t, y } = regular(200);
    for (let i = 120; i < 200; i++) y[i] += 40;
    const flags = flagsOf(single(t, y), { channels: one }, 100);
    expect(kinds(flags)).toEqual(['jump']);
    expect(flags[0].detail).toMatch(/persistent/);
    expect(flags[0].t).toBe(t[120]);
  });

  it('jump is noise-aware: range-like noise (sd 8, maxRate 40/s, 0.5 s) breaks the raw rate bound often, but raises no flag', () => {
    const rng = createRng(3);
    const t = Array.from({ length: 720 }, (_, i) => 0.5 * i + 0.1 * (2 * rng.uniform() - 1));
    const y = t.map((s) => 2500 - 8.5 * s + 8 * rng.normal());
    let naive = 0;
    for (let i = 1; i < t.length; i++) if (Math.abs(y[i] - y[i - 1]) / (t[i] - t[i - 1]) > 40) naive++;
    console.info(`raw differences beyond 40 m/s from noise alone: ${naive} of ${t.length - 1}`);
    expect(naive).toBeGreaterThan(20);
    expect(flagsOf(single(t, y), { channels: [{ name: 'range', maxRate: 40 }] }, 360)).toEqual([]);
  });

  it('jump: a circular channel is unwrapped (a bearing crossing north is not a jump)', () => {
    const rng = createRng(4);
    const t = Array.from({ length: 200 }, (_, i) => 0.5 * i);
    const b = t.map((s) => (((350 + 0.5 * s + 0.2 * rng.normal()) % 360) + 360) % 360);
    expect(flagsOf(single(t, b), { channels: [{ name: 'bearing', maxRate: 8, period: 360 }] }, 100)).toEqual([]);
    expect(kinds(flagsOf(single(t, b), { channels: [{ name: 'bearing', maxRate: 8 }] }, 100))).toContain('jump');
  });

  it('frozen: 10 equal values (4.5 s) are one flag over their span; 4 equal values are none', () => {
    const { t, y } = regular(200);
    const frozen = y.map((v, i) => (i >= 60 && i < 70 ? y[60] : v));
    const flags = flagsOf(single(t, frozen), { channels: [{ name: 'x' }] }, 100);
    expect(flags).toEqual([expect.objectContaining({ kind: 'frozen', t: t[60], tEnd: t[69], channel: 0 })]);
    const brief = y.map((v, i) => (i >= 60 && i < 64 ? y[60] : v));
    expect(flagsOf(single(t, brief), { channels: [{ name: 'x' }] }, 100)).toEqual([]);
  });

  it('short: a track closing 10 s before the horizon is flagged, one closing within three intervals is not', () => {
    const { t, y } = regular(200);
    const points = single(t, y);
    const last = t[t.length - 1];
    expect(flagsOf(points, { channels: one }, last + 10)).toEqual([expect.objectContaining({ kind: 'short', t: last, tEnd: last + 10 })]);
    expect(flagsOf(points, { channels: one }, last + 1)).toEqual([]);
    expect(kinds(flagsOf([], { channels: one }, 100))).toEqual(['short']);
  });

  it('a missing channel value (NaN) is skipped, not flagged', () => {
    const { t, y } = regular(200);
    y[50] = Number.NaN;
    expect(flagsOf(single(t, y), { channels: one }, 100)).toEqual([]);
  });
});

describe('reducer contract', () => {
  it('does not change the state it is given', () => {
    const { t, y } = regular(60);
    let state = initialQuality({ channels: one });
    for (const p of single(t, y).slice(0, 50)) state = observePoint(state, p).state;
    // What the state holds: the held points are the window [start, end) of an array states share.
    const view = (q: QualityState) => ({ ...q, buffer: q.buffer.arr.slice(q.buffer.start, q.buffer.end) });
    const before = structuredClone(view(state));
    observePoint(state, { seq: 99, t: t[50], values: [y[50] + 100] });
    closeTrack(state, 100);
    expect(view(state)).toEqual(before);
  });

  it('two different next points from the same state give what each gives from a copy of it', () => {
    const { t, y } = regular(60);
    let state = initialQuality({ channels: one });
    for (const p of single(t, y).slice(0, 50)) state = observePoint(state, p).state;
    const copy = structuredClone(state);
    const a = { seq: 51, t: t[50], values: [y[50] + 100] };
    const b = { seq: 51, t: t[50], values: [y[50]] };
    const fromA = observePoint(state, a);
    const fromB = observePoint(state, b); // the shared array already holds a after the window of state
    expect(closeTrack(fromB.state, 100)).toEqual(closeTrack(observePoint(structuredClone(copy), b).state, 100));
    expect(closeTrack(fromA.state, 100)).toEqual(closeTrack(observePoint(structuredClone(copy), a).state, 100));
  });

  it('rejects a point with the wrong number of values, a non-finite time, or a non-positive limit', () => {
    const state = initialQuality({ channels: one });
    expect(() => observePoint(state, { seq: 0, t: 0, values: [1, 2] })).toThrow(RangeError);
    expect(() => observePoint(state, { seq: 0, t: Number.NaN, values: [1] })).toThrow(RangeError);
    expect(() => initialQuality({ channels: one, gapFactor: 0 })).toThrow(RangeError);
  });

  it('property: points reordered within the tolerance give exactly the flags of the in-order feed', () => {
    const tolerance = 5;
    const options: QualityOptions = { channels: [{ name: 'x', maxRate: 10 }, { name: 'b', maxRate: 8, period: 360 }], reorderTolerance: tolerance };
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 1_000_000 }), fc.double({ min: 0, max: 0.999, noNaN: true }), (seed, spread) => {
        const rng = createRng(seed);
        // A track with a spike, a dropout and a frozen stretch at random places.
        const n = 300;
        const t = Array.from({ length: n }, (_, i) => 0.5 * i + 0.1 * rng.uniform());
        const y = t.map((s) => 3 * s + rng.normal());
        const b = t.map((s) => (355 + 0.3 * s + 0.3 * rng.normal()) % 360);
        y[40 + rng.int(60)] += 40;
        const f = 120 + rng.int(60);
        for (let i = f; i < f + 8; i++) b[i] = b[f];
        const gap = 200 + rng.int(60);
        const points = t.map((s, i) => ({ seq: i, t: s, values: [y[i], b[i]] })).filter((_, i) => i < gap || i > gap + 12);
        // Arrival order: sorted by t + δ with δ in [0, spread · tolerance): never behind by more than the tolerance.
        const arrival = points
          .map((p) => ({ p, key: p.t + spread * tolerance * rng.uniform() }))
          .sort((u, v) => u.key - v.key)
          .map((u) => u.p);
        const inOrder = flagsOf(points, options, 160);
        expect(inOrder.length).toBeGreaterThanOrEqual(3);
        expect(flagsOf(arrival, options, 160)).toEqual(inOrder);
      }),
      { seed: 20261201, numRuns: 40 },
    );
  });
});
