import { describe, expect, it } from 'vitest';
import { normalCdf, normalQuantile } from '../../engine/normal.js';
import { expectClose } from '../support/compare.js';
import { section } from '../support/reference.js';

interface PpfRow { p: number; ppf: number }
interface CdfRow { x: number; cdf: number; sf: number }

describe('standard normal', () => {
  it('quantile matches scipy.stats.norm.ppf to rounding (fixture)', () => {
    for (const r of section<PpfRow[]>('normal_ppf')) expectClose(normalQuantile(r.p), r.ppf, 4e-15, 1e-15, `ppf(${r.p})`);
  });
  it('cdf and upper tail match scipy.stats.norm.cdf / sf (fixture)', () => {
    for (const r of section<CdfRow[]>('normal_cdf')) {
      expectClose(normalCdf(r.x), r.cdf, 2e-14, 0, `cdf(${r.x})`);
      expectClose(normalCdf(-r.x), r.sf, 2e-14, 0, `sf(${r.x})`);
    }
  });
  it('gives the documented results at the ends of the domain', () => {
    expect(normalQuantile(0)).toBe(Number.NEGATIVE_INFINITY);
    expect(normalQuantile(1)).toBe(Number.POSITIVE_INFINITY);
    expect(normalQuantile(1.5)).toBeNaN();
  });
});
