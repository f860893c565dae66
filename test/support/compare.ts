/**
 * Tolerance checks that print the inputs, actual, expected, difference and tolerance on failure
 * (stdlib-js habit): |actual − expected| ≤ max(rtol·|expected|, atol).
 */
import { expect } from 'vitest';

export function expectClose(actual: number, expected: number, rtol: number, atol: number, label: string): void {
  const diff = Math.abs(actual - expected);
  const tol = Math.max(rtol * Math.abs(expected), atol);
  if (!(diff <= tol)) {
    expect.fail(`${label}: actual ${actual}, expected ${expected}, |diff| ${diff.toExponential(3)} > tolerance ${tol.toExponential(3)} (rtol ${rtol}, atol ${atol})`);
  }
}

export function expectAllClose(actual: ArrayLike<number>, expected: ArrayLike<number>, rtol: number, atol: number, label: string): void {
  expect(actual.length, `${label}: length`).toBe(expected.length);
  for (let i = 0; i < expected.length; i++) expectClose(actual[i], expected[i], rtol, atol, `${label}[${i}]`);
}

/**
 * Two-sided binomial interval [lo, hi] of counts with probability ≥ level under Binomial(n, p),
 * from the exact binomial CDF (computed in log space).
 */
export function binomialInterval(n: number, p: number, level: number): { lo: number; hi: number } {
  const logPmf = (k: number): number => logChoose(n, k) + k * Math.log(p) + (n - k) * Math.log1p(-p);
  const pmf = Array.from({ length: n + 1 }, (_, k) => Math.exp(logPmf(k)));
  const tail = (1 - level) / 2;
  let acc = 0;
  let lo = 0;
  while (lo < n && acc + pmf[lo] <= tail) acc += pmf[lo++];
  acc = 0;
  let hi = n;
  while (hi > 0 && acc + pmf[hi] <= tail) acc += pmf[hi--];
  return { lo, hi };
}

/** P(lo ≤ X ≤ hi) for X ~ Binomial(n, p), from the exact probability mass function. */
export function binomialMass(n: number, p: number, lo: number, hi: number): number {
  let s = 0;
  for (let k = Math.max(0, lo); k <= Math.min(n, hi); k++) s += Math.exp(logChoose(n, k) + k * Math.log(p) + (n - k) * Math.log1p(-p));
  return s;
}

/** P(X ≥ k) for X ~ Binomial(n, p), from the exact pmf (computed in log space). */
export function binomialUpperTail(n: number, p: number, k: number): number {
  let acc = 0;
  for (let j = Math.max(0, Math.ceil(k)); j <= n; j++) acc += Math.exp(logChoose(n, j) + j * Math.log(p) + (n - j) * Math.log1p(-p));
  return Math.min(1, acc);
}

function logChoose(n: number, k: number): number {
  let s = 0;
  for (let i = 1; i <= k; i++) s += Math.log(n - k + i) - Math.log(i);
  return s;
}
