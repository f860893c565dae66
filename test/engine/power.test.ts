/**
 * Power against a plain numpy version of the textbook method (test/fixtures/make_power_fixtures.py:
 * each simulated curve judged against the other simulated curves by a new numpy.linalg.eigh fit,
 * the live curve against all of them, plain rank p-values). The fixture holds the curves, numpy's
 * statistics and p-values; the test runs plumbline's calibration (engine/calibrate.ts) on the same
 * curves. It checks that the statistics agree (an independent implementation of the same
 * definitions), that plumbline rejects at least as often on every alternative (level, shape, fine
 * structure, timing, spread), and it prints the earlier pooled calibration beside them.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { buildReference, judgeAgainst, pooledConformalAssess } from '../../engine/calibrate.js';
import { seedFor } from '../../engine/rng.js';
import { expectAllClose } from '../support/compare.js';

interface PowerFixture {
  meta: { grid: number; sims: number; runs: number; components: number };
  grid_weights: number[];
  sims: number[][];
  sims_loo: Record<'l2' | 'score' | 'residual', number[]>;
  alternatives: Record<string, { live: number[][]; statistics: Record<'l2' | 'score' | 'residual', number[]>; p: Record<'l2' | 'score' | 'residual', number[]> }>;
}

const fx = JSON.parse(readFileSync(new URL('../fixtures/power.json', import.meta.url), 'utf8')) as PowerFixture;
const STATS = ['l2', 'score', 'residual'] as const;
const ALPHA = 0.05;
const gw = Float64Array.from(fx.grid_weights);
const sims = fx.sims.map((r) => Float64Array.from(r));
const rule = { kind: 'variance', fraction: 0.95 } as const;
const reference = buildReference(sims, gw, 2, rule, 5);

describe('plumbline against a plain numpy leave-one-out implementation (same curves)', () => {
  it('keeps the same number of components and the same leave-one-out statistics of the simulated curves (1e-8 relative)', () => {
    expect(reference.model.eigenvalues.length).toBe(fx.meta.components);
    for (const s of STATS) expectAllClose(reference.statistics[s], fx.sims_loo[s], 1e-8, 1e-10, `simulated ${s}`);
  });

  for (const [alt, data] of Object.entries(fx.alternatives)) {
    it(`${alt}: the live statistics agree and every statistic rejects at least as often as numpy's`, () => {
      const ours = { l2: 0, score: 0, residual: 0, overall: 0 };
      const theirs = { l2: 0, score: 0, residual: 0 };
      const pooled = { l2: 0, score: 0, residual: 0, overall: 0 };
      data.live.forEach((row, r) => {
        const x = Float64Array.from(row);
        const res = judgeAgainst(reference, x, seedFor(9, alt, String(r)));
        for (const s of STATS) {
          const want = data.statistics[s][r];
          if (Math.abs(res.live[s] - want) > 1e-8 * Math.max(1, Math.abs(want))) {
            throw new Error(`${alt} run ${r} ${s}: plumbline ${res.live[s]}, numpy ${want}`);
          }
          if (res.pValues[s] <= ALPHA) ours[s]++;
          if (data.p[s][r] <= ALPHA) theirs[s]++;
        }
        if (res.pValues.overall <= ALPHA) ours.overall++;
        const old = pooledConformalAssess(sims, x, gw, 2, rule).pValues;
        for (const k of [...STATS, 'overall'] as const) if (old[k] <= ALPHA) pooled[k]++;
      });
      console.info(`${alt} (rejections of ${data.live.length} at α = ${ALPHA}): numpy leave-one-out`, theirs, '| plumbline', ours, '| earlier pooled fit', pooled);
      for (const s of STATS) expect(ours[s], `${alt} ${s}`).toBeGreaterThanOrEqual(theirs[s]);
    });
  }
});
