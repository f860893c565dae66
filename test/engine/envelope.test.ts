import { describe, expect, it } from 'vitest';
import { buildBaseline, baselineEnvelope, smoothTrack } from '../../engine/assess.js';
import { quantileSorted, simulatedEnvelope } from '../../engine/envelope.js';
import { createRng } from '../../engine/rng.js';
import { binomialInterval, binomialMass, expectClose } from '../support/compare.js';
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
  const fresh = Array.from({ length: 2000 }, (_, i) => smoothTrack(sampleTrack(createRng(5000 + i), `f-${i}`), baseline.basis, baseline.gridEval, baseline.penalty).curve);
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

  // Coverage checks with 2,000 fresh tracks, one check per track, so the counts are binomial. Each
  // acceptance range holds a correct band with probability ≥ 0.99 and one whose tail probability is
  // off by a factor 2 with probability ≤ 0.01 (exact binomial, binomialMass; printed below).
  it('pointwise 90 % band: misses at one random time per fresh track within the binomial 99 % range of 2,000', () => {
    const pick = createRng(5999);
    let misses = 0;
    fresh.forEach((x, i) => {
      const c = i % 2;
      const g = pick.int(M);
      const b = env[c].pointwise[1];
      if (x[c * M + g] < b.lower[g] || x[c * M + g] > b.upper[g]) misses++;
    });
    const range = binomialInterval(fresh.length, 0.1, 0.99);
    const inside = (p: number) => binomialMass(fresh.length, p, range.lo, range.hi);
    console.info(`pointwise 90 % band: ${misses} of ${fresh.length} misses (range ${range.lo}–${range.hi}; P(inside) at 10 % ${inside(0.1).toFixed(4)}, at 5 % ${inside(0.05).toExponential(1)}, at 20 % ${inside(0.2).toExponential(1)})`);
    expect(inside(0.1)).toBeGreaterThanOrEqual(0.99);
    expect(Math.max(inside(0.05), inside(0.2))).toBeLessThanOrEqual(0.01);
    expect(misses).toBeGreaterThanOrEqual(range.lo);
    expect(misses).toBeLessThanOrEqual(range.hi);
  });

  it(`simultaneous ${1 - settings.alpha} band: whole fresh tracks outside it within [75, 125] of 2,000`, () => {
    let outside = 0;
    for (const x of fresh) {
      let ok = true;
      for (let c = 0; c < 2 && ok; c++) {
        const s = env[c].simultaneous;
        for (let g = 0; g < M; g++) if (x[c * M + g] < s.lower[g] || x[c * M + g] > s.upper[g]) { ok = false; break; }
      }
      if (!ok) outside++;
    }
    const inside = (p: number) => binomialMass(fresh.length, p, 75, 125);
    console.info(`simultaneous band: ${outside} of ${fresh.length} fresh tracks leave it (P(inside [75, 125]) at 5 % ${inside(0.05).toFixed(4)}, at 2.5 % ${inside(0.025).toExponential(1)}, at 10 % ${inside(0.1).toExponential(1)}); multiplier ${env[0].simultaneous.multiplier.toFixed(3)}`);
    expect(inside(0.05)).toBeGreaterThanOrEqual(0.99);
    expect(outside).toBeGreaterThanOrEqual(75);
    expect(outside).toBeLessThanOrEqual(125);
    // A simultaneous band must be wider than the pointwise normal 95 % band (z = 1.96).
    expect(env[0].simultaneous.multiplier).toBeGreaterThan(1.96);
  });

  it('refuses fewer than 3 curves', () => {
    expect(() => simulatedEnvelope([new Float64Array(4), new Float64Array(4)], 1, 0.05)).toThrow(/at least 3/);
  });
});
