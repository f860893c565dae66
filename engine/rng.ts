/**
 * Seeded pseudo-random numbers for fixtures, demo data and randomized linear algebra.
 *
 * Method: xoshiro128** (Blackman & Vigna, "Scrambled linear pseudorandom number generators",
 * ACM TOMS 47(4), 2021, doi:10.1145/3460772), state seeded from one 32-bit integer by splitmix32.
 * Normal deviates by the Marsaglia polar method (Marsaglia & Bray, SIAM Review 6(3), 1964,
 * doi:10.1137/1006063). Never uses Math.random: every run is reproducible from its seed.
 */
export interface Rng {
  /** Uniform on [0, 1) with 32 bits of resolution. */
  uniform(): number;
  /** Standard normal deviate. */
  normal(): number;
  /** Integer uniform on [0, n). */
  int(n: number): number;
  /** A new independent stream derived from this one (for per-track generators). */
  fork(): Rng;
}

function splitmix32(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x9e3779b9) >>> 0;
    let z = s;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b) >>> 0;
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35) >>> 0;
    return (z ^ (z >>> 16)) >>> 0;
  };
}

export function createRng(seed: number): Rng {
  if (!Number.isFinite(seed)) throw new TypeError(`rng seed must be a finite number, got ${seed}`);
  const init = splitmix32(Math.floor(seed) >>> 0);
  let a = init(), b = init(), c = init(), d = init();
  if ((a | b | c | d) === 0) a = 1;
  let spare = NaN;

  const next = (): number => {
    const result = Math.imul(rotl(Math.imul(b, 5) >>> 0, 7), 9) >>> 0;
    const t = (b << 9) >>> 0;
    c ^= a; d ^= b; b ^= c; a ^= d;
    c ^= t;
    d = rotl(d, 11);
    a >>>= 0; b >>>= 0; c >>>= 0; d >>>= 0;
    return result;
  };

  const rng: Rng = {
    uniform: () => next() / 4294967296,
    normal: () => {
      if (!Number.isNaN(spare)) {
        const v = spare;
        spare = NaN;
        return v;
      }
      // Polar method: rejection loop accepts with probability pi/4; the bound below is never reached
      // in practice (probability (1 - pi/4)^200 < 1e-130) but keeps the loop finite.
      for (let k = 0; k < 200; k++) {
        const u = 2 * rng.uniform() - 1;
        const v = 2 * rng.uniform() - 1;
        const s = u * u + v * v;
        if (s > 0 && s < 1) {
          const f = Math.sqrt((-2 * Math.log(s)) / s);
          spare = v * f;
          return u * f;
        }
      }
      throw new Error('rng.normal: polar method did not accept within 200 draws');
    },
    int: (n: number) => Math.floor(rng.uniform() * n),
    fork: () => createRng(next() ^ Math.imul(next(), 0x27d4eb2d)),
  };
  return rng;
}

function rotl(x: number, k: number): number {
  return ((x << k) | (x >>> (32 - k))) >>> 0;
}

/**
 * A 32-bit seed from a base seed and labels (FNV-1a over the UTF-16 code units, Fowler–Noll–Vo;
 * IETF draft-eastlake-fnv, common practice), so that a stream can be named by what it is for
 * (e.g. a vignette and a run) and be the same in every process that names it alike.
 */
export function seedFor(base: number, ...labels: readonly string[]): number {
  let h = 0x811c9dc5 ^ (Math.floor(base) >>> 0);
  const mix = (code: number): void => {
    h ^= code & 0xffff;
    h = Math.imul(h, 0x01000193) >>> 0;
  };
  for (const label of labels) {
    for (let i = 0; i < label.length; i++) mix(label.charCodeAt(i));
    mix(0x1f);
  }
  return h >>> 0;
}
