/**
 * Unwrap a circular channel (for example a bearing in degrees) along a track: whenever the step
 * between consecutive samples falls outside (-period/2, period/2], a whole number of periods is
 * added to it and to everything after it. This is the usual phase-unwrapping rule (numpy.unwrap
 * with `period` does the same); it assumes the true change between consecutive samples is less
 * than half a period, which holds for a tracked vessel sampled at about 2 Hz. Values are shifted
 * only by whole periods, so a track that never crosses the wrap point comes back bit for bit, and
 * unwrapping twice gives the same result as unwrapping once.
 */
export function unwrapCircular(values: Float64Array, period: number): Float64Array {
  if (!(period > 0)) throw new RangeError(`unwrapCircular: period must be positive, got ${period}`);
  const out = new Float64Array(values.length);
  if (values.length === 0) return out;
  const half = period / 2;
  let offset = 0;
  out[0] = values[0];
  for (let i = 1; i < values.length; i++) {
    const step = values[i] + offset - out[i - 1];
    if (step > half || step <= -half) offset -= Math.round(step / period) * period;
    let v = values[i] + offset;
    // Math.round maps a step of exactly −period/2 to 0; keep the representative in (−half, half].
    if (v - out[i - 1] <= -half) {
      offset += period;
      v += period;
    }
    out[i] = v;
  }
  return out;
}
