/**
 * Seeded live tracks for comparing data-quality monitors (test/engine/quality-equivalence.test.ts,
 * test/bench/quality.bench.ts): two channels (a range-like line with noise and a bearing-like
 * circular channel crossing 0/360), with dropouts, single and multi-sample glitches, persistent
 * steps, frozen runs, repeated times, NaN readings, reorderings within the tolerance and points
 * later than it (time reversals). All invented.
 */
import type { QualityChannel, QualityPoint } from '../../engine/quality.js';
import { createRng } from '../../engine/rng.js';

export interface TrackSpec {
  readonly seed: number;
  readonly n: number;
  /** Sampling rate, Hz. */
  readonly hz: number;
  /** Seconds a point may arrive late while staying within the tolerance. */
  readonly tolerance: number;
  /** Share of the points that arrive late (within the tolerance). */
  readonly lateShare: number;
}

export const RATE_CHANNELS: readonly QualityChannel[] = [
  { name: 'range', maxRate: 40 },
  { name: 'bearing', maxRate: 8, period: 360 },
];
export const PLAIN_CHANNELS: readonly QualityChannel[] = [{ name: 'x' }, { name: 'y' }];

/** Points in arrival order. */
export function qualityTrack(spec: TrackSpec): QualityPoint[] {
  const rng = createRng(spec.seed);
  const { n, hz, tolerance } = spec;
  const dt = 1 / hz;
  const t: number[] = [];
  let s = 10 * rng.uniform();
  for (let i = 0; i < n; i++) {
    s += dt * (0.8 + 0.4 * rng.uniform());
    if (rng.uniform() < 0.004) s += dt * (5 + 30 * rng.uniform()); // dropout (some below the factor)
    t.push(rng.uniform() < 0.003 && i > 0 ? t[i - 1] : s); // a repeated time now and then
  }
  const speed = 5 + 10 * rng.uniform();
  const y = t.map((u) => 2000 - speed * u + 8 * rng.normal());
  const b = t.map((u) => (((350 + 0.05 * u + 0.3 * rng.normal()) % 360) + 360) % 360);
  for (let i = 0; i < n; i++) {
    const r = rng.uniform();
    if (r < 0.004) {
      const len = 1 + rng.int(4); // a glitch of 1-4 samples
      const size = (rng.uniform() < 0.5 ? -1 : 1) * (100 + 400 * rng.uniform());
      for (let k = i; k < Math.min(n, i + len); k++) y[k] += size;
    } else if (r < 0.006) {
      const size = 6 + 10 * rng.uniform(); // a bearing glitch
      for (let k = i; k < Math.min(n, i + 1 + rng.int(3)); k++) b[k] = (b[k] + size) % 360;
    } else if (r < 0.007) {
      const size = 300 + 300 * rng.uniform(); // a persistent step
      for (let k = i; k < n; k++) y[k] += size;
    } else if (r < 0.010) {
      const len = 3 + rng.int(Math.max(1, Math.round(4 * hz))); // a frozen run
      for (let k = i + 1; k < Math.min(n, i + len); k++) b[k] = b[i];
    } else if (r < 0.014) {
      if (rng.uniform() < 0.5) y[i] = Number.NaN;
      else b[i] = Number.NaN;
    }
  }
  const points: QualityPoint[] = t.map((u, i) => ({ seq: i + 1, t: u, values: [y[i], b[i]] }));
  // Arrival order: by t + δ, δ within the tolerance; a few points much later (time reversals).
  const keyed = points.map((p) => ({ p, key: p.t + (rng.uniform() < spec.lateShare ? 0.9 * tolerance * rng.uniform() : 0) }));
  for (const k of keyed) if (rng.uniform() < 0.002) k.key += tolerance * (1.5 + 3 * rng.uniform());
  return keyed.sort((u, v) => u.key - v.key).map((u) => u.p);
}
