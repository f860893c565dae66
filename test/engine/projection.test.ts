import { describe, expect, it } from 'vitest';
import { buildBaseline, smoothTrack } from '../../engine/assess.js';
import { fullWindow, windowWeights } from '../../engine/grid.js';
import { fitProjectionModel, projectRemainder } from '../../engine/projection.js';
import { createRng } from '../../engine/rng.js';
import { expectClose } from '../support/compare.js';
import { H, SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, sampleBaseline, sampleTrack } from '../support/synthetic.js';

const settings = SYNTHETIC_SETTINGS;
const channels = SYNTHETIC_CHANNELS;

describe('projection of the rest of a track (conditional expectation under the baseline)', () => {
  const baseline = buildBaseline('V', H, channels, sampleBaseline(createRng(61), 300), settings);
  const model = fitProjectionModel(baseline.curves, windowWeights(baseline.grid, fullWindow(H)), 2);
  const M = settings.gridSize;

  it('the 95 % band covers about 95 % of the unseen part of fresh tracks (pooled coverage)', () => {
    let inside = 0;
    let total = 0;
    let errProjected = 0;
    let errMean = 0;
    for (let i = 0; i < 200; i++) {
      const fresh = smoothTrack(sampleTrack(createRng(9000 + i), `f${i}`), baseline.basis, baseline.gridEval, baseline.penalty).curve;
      const observed = Uint8Array.from({ length: M }, (_, g) => (baseline.grid.points[g] <= 40 ? 1 : 0));
      const p = projectRemainder(model, fresh, observed);
      for (let g = 0; g < M; g++) {
        if (observed[g]) continue;
        const d = g; // channel 0
        total++;
        if (fresh[d] >= p.lower[d] && fresh[d] <= p.upper[d]) inside++;
        errProjected += (fresh[d] - p.mean[d]) ** 2;
        errMean += (fresh[d] - model.fpca.mean[d]) ** 2;
      }
    }
    console.info(`projection: coverage ${(inside / total).toFixed(3)}, RMS error ${Math.sqrt(errProjected / total).toFixed(2)} m vs ${Math.sqrt(errMean / total).toFixed(2)} m from the mean alone`);
    // Correlated within a track, so a tolerance of ±0.04 around the nominal 0.95.
    expectClose(inside / total, 0.95, 0, 0.04, 'coverage');
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
