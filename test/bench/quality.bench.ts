/**
 * The data-quality monitor per point: `npm run bench:quality`. Prints figures, asserts nothing about
 * time. The same seeded live tracks (test/support/quality-tracks.ts: dropouts, glitches, steps,
 * frozen runs, NaN readings, reorderings, time reversals) are fed point by point to engine/quality.ts
 * and to the previous implementation kept as a test oracle (test/support/quality-reference.ts);
 * the flags must be identical (kind, extent, channel, detail) or no time is printed for that case.
 * 2 % of the points arrive late (within the 5 s tolerance), 0.2 % later than it. Three interleaved rounds (old, new, old, new, ...), the median of each; ns per point, one core.
 * Cases: channels without a rate bound (as the service benchmark's plan: dropout, frozen, order
 * checks only) and channels with one (the jump check: Theil–Sen line and MAD scale), at 50 Hz and 2 Hz.
 */
import * as current from '../../engine/quality.js';
import type { QualityChannel, QualityFlag, QualityOptions, QualityPoint } from '../../engine/quality.js';
import * as reference from '../support/quality-reference.js';
import { PLAIN_CHANNELS, RATE_CHANNELS, qualityTrack } from '../support/quality-tracks.js';

const TRACKS = Number(process.env.BENCH_TRACKS ?? 8);
const POINTS = Number(process.env.BENCH_POINTS ?? 10_000);
const ROUNDS = 3;

/** What the two monitors have in common (their state types differ). */
interface Monitor<S> {
  initialQuality(options: QualityOptions): S;
  observePoint(state: S, point: QualityPoint): { state: S; flags: QualityFlag[] };
  closeTrack(state: S, horizon: number): QualityFlag[];
}

function feed<S>(m: Monitor<S>, tracks: readonly QualityPoint[][], channels: readonly QualityChannel[]): QualityFlag[] {
  const flags: QualityFlag[] = [];
  for (const points of tracks) {
    let s = m.initialQuality({ channels, reorderTolerance: 5 });
    for (const p of points) {
      const r = m.observePoint(s, p);
      s = r.state;
      for (const f of r.flags) flags.push(f);
    }
    for (const f of m.closeTrack(s, points[points.length - 1].t + 1)) flags.push(f);
  }
  return flags;
}

function timeOf<S>(m: Monitor<S>, tracks: readonly QualityPoint[][], channels: readonly QualityChannel[]): number {
  const start = process.hrtime.bigint();
  feed(m, tracks, channels);
  return Number(process.hrtime.bigint() - start);
}

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[xs.length >> 1];

for (const [label, channels, hz] of [
  ['no rate bound (as the service benchmark), 50 Hz', PLAIN_CHANNELS, 50],
  ['rate bounds (jump check), 50 Hz', RATE_CHANNELS, 50],
  ['rate bounds (jump check), 2 Hz', RATE_CHANNELS, 2],
] as const) {
  const tracks = Array.from({ length: TRACKS }, (_, k) => qualityTrack({ seed: 1000 + k, n: POINTS, hz, tolerance: 5, lateShare: 0.02 }));
  const points = TRACKS * POINTS;
  const oldFlags = JSON.stringify(feed(reference, tracks, channels));
  const newFlags = JSON.stringify(feed(current, tracks, channels));
  if (oldFlags !== newFlags) {
    console.log(`${label}: the flags differ between the previous and the current monitor; no time printed`);
    process.exitCode = 1;
    continue;
  }
  const old: number[] = [];
  const now: number[] = [];
  for (let r = 0; r < ROUNDS; r++) {
    old.push(timeOf(reference, tracks, channels) / points);
    now.push(timeOf(current, tracks, channels) / points);
  }
  const o = median(old);
  const c = median(now);
  const flagCount = (JSON.parse(newFlags) as unknown[]).length;
  console.log(
    `${label}: ${points.toLocaleString('en')} points, ${flagCount} flags identical; ns per point (median of ${ROUNDS} interleaved rounds) ` +
      `previous ${o.toFixed(0)}, current ${c.toFixed(0)} = ${(o / c).toFixed(2)}x [rounds previous ${old.map((x) => x.toFixed(0)).join(', ')}; current ${now.map((x) => x.toFixed(0)).join(', ')}]`,
  );
}
