/**
 * χ² upper quantiles for 1 and 2 degrees of freedom (engine/chisquare.ts). Sources: jstat 1.9.6
 * (npm, a general-purpose reference library) chisquare.inv, and the closed form of the χ²₂ tail.
 */
import jStat from 'jstat';
import { describe, expect, it } from 'vitest';
import { chiSquareUpper } from '../../engine/chisquare.js';
import { expectClose } from '../support/compare.js';

describe('chiSquareUpper', () => {
  it.each([0.2, 0.05, 0.01, 1e-4, 1e-8])('α = %s: agrees with jstat chisquare.inv(1 − α) for 1 and 2 degrees of freedom', (alpha) => {
    // jstat inverts its CDF iteratively; 1e-6 relative is well inside its accuracy for these α.
    expectClose(chiSquareUpper(alpha, 1), jStat.chisquare.inv(1 - alpha, 1), 1e-6, 0, `df 1, α ${alpha}`);
    expectClose(chiSquareUpper(alpha, 2), jStat.chisquare.inv(1 - alpha, 2), 1e-6, 0, `df 2, α ${alpha}`);
  });

  it('closed forms: df 2 is −2 ln α; the χ²₂ tail at that point is exactly α (A&S 26.4.21)', () => {
    expect(chiSquareUpper(0.05, 2)).toBe(-2 * Math.log(0.05));
    expectClose(Math.exp(-chiSquareUpper(0.05, 2) / 2), 0.05, 1e-15, 0, 'tail');
  });

  it('α outside (0, 1) has no quantile: NaN', () => {
    for (const a of [0, 1, -0.1, Number.NaN]) {
      expect(chiSquareUpper(a, 1)).toBeNaN();
      expect(chiSquareUpper(a, 2)).toBeNaN();
    }
  });
});
