/**
 * Upper quantiles of the χ² distribution with 1 or 2 degrees of freedom: the x with P(X > x) = α
 * (the radius² of a score-plane threshold ellipse and the half-width of a one-component band).
 * - 2 degrees of freedom: x = −2 ln α, since the χ²₂ tail is exp(−x/2) (Abramowitz & Stegun 26.4.21
 *   with k = 1).
 * - 1 degree of freedom: x = z², z = Φ⁻¹(1 − α/2), since X = Z² for Z standard normal (A&S 26.4.4);
 *   Φ⁻¹ from ./normal.ts (at rounding level against scipy.stats.norm.ppf).
 * α outside (0, 1) gives NaN (no quantile exists).
 */
import { normalQuantile } from './normal.js';

export function chiSquareUpper(alpha: number, df: 1 | 2): number {
  if (!(alpha > 0 && alpha < 1)) return Number.NaN;
  if (df === 2) return -2 * Math.log(alpha);
  const z = normalQuantile(alpha / 2);
  return z * z;
}
