import { describe, expect, it } from 'vitest';
import { buildBaseline, baselineEnvelope, smoothTrack } from '../../engine/assess.js';
import { quantileSorted, simulatedEnvelope } from '../../engine/envelope.js';
import { createRng } from '../../engine/rng.js';
import { binomialInterval, expectClose } from '../support/compare.js';
import { H, SYNTHETIC_CHANNELS, SYNTHETIC_SETTINGS, sampleBaseline, sampleTrack } from '../support/synthetic.js';

const settings = SYNTHETIC_SETTINGS;
const channels = SYNTHETIC_CHANNELS;

describe('quantiles', () => {
  it('follow Hyndman–Fan definition 7 (numpy.quantile default): worked values', () => {
    // numpy.quantile([1, 2, 3, 4], [0, 0.25, 0.5, 0.9, 1]) = [1, 1.75, 2.5, 3.7, 4] (numpy docs, linear method)
    const s = Float64Array.of(1, 2, 3, 4);
    const got = [0, 0.25, 0.5, 0.9, 1].map((q) => quantileSorted(s, q));
    [1, 1.75, 2.5, 3.7, 4].forEach((v, i) => expectClose(got[i], v, 1e-15, 1e-15, `q${i}`));
  });
});

describe('envelopes of the simulated tracks', () => {
  const baseline = buildBaseline('V', H, channels, sampleBaseline(createRng(41), 200), settings);
  const env = baselineEnvelope(baseline);
  const fresh = Array.from({ length: 400 }, (_, i) => smoothTrack(sampleTrack(createRng(5000 + i), `f-${i}`), baseline.basis, baseline.gridEval, baseline.penalty).curve);
  const M = settings.gridSize;

  it('bands are nested and ordered (50 ⊂ 90 ⊂ 99 %)', () => {
    for (const ch of env) {
      for (let g = 0; g < M; g++) {
        const [b50, b90, b99] = ch.pointwise;
        expect(b99.lower[g]).toBeLessThanOrEqual(b90.lower[g]);
        expect(b90.lower[g]).toBeLessThanOrEqual(b50.lower[g]);
        expect(b50.upper[g]).toBeLessThanOrEqual(b90.upper[g]);
        expect(b90.upper[g]).toBeLessThanOrEqual(b99.upper[g]);
      }
    }
  });

  it('pointwise 90 % band covers about 90 % of fresh tracks at each time (pooled over the grid)', () => {
    let inside = 0;
    let total = 0;
    for (const x of fresh) {
      for (let c = 0; c < 2; c++) {
        for (let g = 0; g < M; g += 8) {
          const b = env[c].pointwise[1];
          total++;
          if (x[c * M + g] >= b.lower[g] && x[c * M + g] <= b.upper[g]) inside++;
        }
      }
    }
    // Correlated across grid points and channels, so a wide tolerance: 0.9 ± 0.03.
    expectClose(inside / total, 0.9, 0, 0.03, 'pointwise coverage');
  });

  it(`simultaneous ${1 - settings.alpha} band: a whole fresh track stays inside at the stated rate (binomial 99 % band)`, () => {
    let wholly = 0;
    for (const x of fresh) {
      let ok = true;
      for (let c = 0; c < 2 && ok; c++) {
        const s = env[c].simultaneous;
        for (let g = 0; g < M; g++) if (x[c * M + g] < s.lower[g] || x[c * M + g] > s.upper[g]) { ok = false; break; }
      }
      if (ok) wholly++;
    }
    const b = binomialInterval(fresh.length, 1 - settings.alpha, 0.99);
    console.info(`simultaneous band: ${wholly} of ${fresh.length} fresh tracks wholly inside (band ${b.lo}–${b.hi}); multiplier ${env[0].simultaneous.multiplier.toFixed(3)}`);
    expect(wholly).toBeGreaterThanOrEqual(b.lo);
    expect(wholly).toBeLessThanOrEqual(b.hi);
    // A simultaneous band must be wider than the pointwise normal 95 % band (z = 1.96).
    expect(env[0].simultaneous.multiplier).toBeGreaterThan(1.96);
  });

  it('refuses fewer than 3 curves', () => {
    expect(() => simulatedEnvelope([new Float64Array(4), new Float64Array(4)], 1, 0.05)).toThrow(/at least 3/);
  });
});
