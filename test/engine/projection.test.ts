import { describe, expect, it } from 'vitest';
import { buildBaseline, smoothTrack } from '../../engine/assess.js';
import { fullWindow, windowWeights } from '../../engine/grid.js';
import { fitProjectionModel, projectRemainder } from '../../engine/projection.js';
import { createRng } from '../../engine/rng.js';
import { binomialMass } from '../support/compare.js';
import { H, SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, sampleBaseline, sampleTrack } from '../support/synthetic.js';

const settings = SYNTHETIC_SETTINGS;
const channels = SYNTHETIC_CHANNELS;

describe('projection of the rest of a track (conditional expectation under the baseline)', () => {
  const baseline = buildBaseline('V', H, channels, sampleBaseline(createRng(61), 300), settings);
  const model = fitProjectionModel(baseline.curves, windowWeights(baseline.grid, fullWindow(H)), 2);
  const M = settings.gridSize;

  it('the 95 % band covers 95 % of the unseen part of fresh tracks: misses of 2,000 within [75, 125]', () => {
    // One unseen grid point per fresh track (seeded), so the 2,000 checks are independent and the
    // misses are Binomial(2000, 0.05) for a correct band. Acceptance [75, 125]: a correct band is
    // inside with probability 0.991; a band with twice or half the tail probability (a 90 % or a
    // 97.5 % band) with probability < 0.001 (exact binomial, test/support/compare.ts binomialMass).
    const reps = 2000;
    const pick = createRng(8999);
    let misses = 0;
    let errProjected = 0;
    let errMean = 0;
    const observed = Uint8Array.from({ length: M }, (_, g) => (baseline.grid.points[g] <= 40 ? 1 : 0));
    const unseen = Array.from({ length: M }, (_, g) => g).filter((g) => !observed[g]);
    for (let i = 0; i < reps; i++) {
      const fresh = smoothTrack(sampleTrack(createRng(9000 + i), `f${i}`), baseline.basis, baseline.gridEval, baseline.penalty).curve;
      const p = projectRemainder(model, fresh, observed);
      const c = i % 2;
      const d = c * M + unseen[pick.int(unseen.length)];
      if (fresh[d] < p.lower[d] || fresh[d] > p.upper[d]) misses++;
      if (c === 0) {
        errProjected += (fresh[d] - p.mean[d]) ** 2;
        errMean += (fresh[d] - model.fpca.mean[d]) ** 2;
      }
    }
    console.info(`projection: ${misses} of ${reps} unseen points outside the 95 % band; RMS error ${Math.sqrt(errProjected / (reps / 2)).toFixed(2)} m vs ${Math.sqrt(errMean / (reps / 2)).toFixed(2)} m from the mean alone`);
    expect(binomialMass(reps, 0.05, 75, 125)).toBeGreaterThanOrEqual(0.99);
    expect(misses).toBeGreaterThanOrEqual(75);
    expect(misses).toBeLessThanOrEqual(125);
    // Knowing the first 40 % of the track must beat the unconditional mean.
    expect(errProjected).toBeLessThan(0.7 * errMean);
  });

  it('with the whole track observed it reproduces the track closely', () => {
    const fresh = smoothTrack(sampleTrack(createRng(77), 'x'), baseline.basis, baseline.gridEval, baseline.penalty).curve;
    const p = projectRemainder(model, fresh, new Uint8Array(M).fill(1));
    let err = 0;
    for (let g = 0; g < M; g++) err = Math.max(err, Math.abs(p.mean[g] - fresh[g]));
    expect(err).toBeLessThan(2);
  });
});
