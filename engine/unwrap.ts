/**
 * Unwrap a circular channel (for example a bearing in degrees) along a track: each step between
 * consecutive samples is replaced by its representative in (-period/2, period/2]. This is the usual
 * phase-unwrapping rule (numpy.unwrap with `period` does the same); it assumes that the true change
 * between consecutive samples is less than half a period, which holds for a tracked vessel sampled
 * at about 2 Hz. The first sample keeps its value.
 */
export function unwrapCircular(values: Float64Array, period: number): Float64Array {
  if (!(period > 0)) throw new RangeError(`unwrapCircular: period must be positive, got ${period}`);
  const out = new Float64Array(values.length);
  if (values.length === 0) return out;
  const half = period / 2;
  out[0] = values[0];
  for (let i = 1; i < values.length; i++) {
    let step = values[i] - values[i - 1];
    step -= Math.round(step / period) * period;
    if (step <= -half) step += period;
    else if (step > half) step -= period;
    out[i] = out[i - 1] + step;
  }
  return out;
}
