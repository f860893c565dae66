/**
 * Runs to a decision: `npm run bench:evidence`. Prints figures; asserts nothing.
 *
 * Alternatives (invented, seeded; test/support/synthetic.ts tracks judged by engine/assess.ts
 * against one baseline of 200 simulated runs, 300 live runs per pool; three smoothed conformal
 * p-values per run, test/support/evidence-power.ts):
 *   level shifts of 3, 4.5 and 5.5 m on the position channel, a local bump of 6 m (centre 50 s,
 *   width 8 s), a wiggle of 2 m (3 cycles).
 * For each: the runs a fixed-sample design needs for 80 % power at α = 0.05 (Fisher's method on the
 * engine's overall p-values, as the fixed verdict uses; and Fisher per statistic with Bonferroni
 * over the three, a fixed design with the same three p-values per run), and E[runs until the
 * evidence reaches 1/α] for
 *   - the vignette's evidence (average of its three statistics' test martingales, adaptive bettor:
 *     engine/evidence/), the design of this version;
 *   - one martingale on the overall p-value alone (the previous design);
 *   - other bettors on the three statistics (power mixture, Vovk–Wang, the predictable plug-in
 *     normal shift (after Waudby-Smith & Ramdas 2024), a posterior mixture over normal shifts, a
 *     mixture of adaptive bettors over the shrinkage c) and an oracle that is told the pool's law
 *     (not a procedure: the best a bettor could do).
 * Then an event of 12 vignettes, 6 with a level shift of 5.5 m, one run of each per round: E[runs
 * to 1/α] for the product, average and hedge over vignettes, against Fisher's fixed design over the
 * event's runs, and the event's evidence after one round.
 */
import { createBettor, eventEvidence, grenanderOnLattice, latticeIndex, type EventCombination, type EvidenceStrategy, type StreamRun } from '../../engine/evidence/index.js';
import { chiSquareSfEven } from '../../engine/combine.js';
import { normalQuantile } from '../../engine/normal.js';
import { createRng } from '../../engine/rng.js';
import { fixedDesignRuns, runsToDecision, singleRunPower, statisticPool, type RunPValues } from '../support/evidence-power.js';
import type { Discrepancy } from '../support/synthetic.js';

const ALPHA = 0.05;
const L = 201;
const REPS = Number(process.env.BENCH_REPS ?? 2000);
const POOL = Number(process.env.BENCH_POOL ?? 300);
const CAP = 150;
const STATS = ['l2', 'score', 'residual'] as const;

/** A bettor on p-values (continuous or lattice) for the comparisons. */
interface PBettor {
  value(p: number): number;
  observe(p: number): void;
}

const engineBettor = (strategy: EvidenceStrategy) => (): PBettor => {
  const b = createBettor(strategy, L);
  return { value: (p) => b.value(latticeIndex(p, L)), observe: (p) => b.observe(latticeIndex(p, L)) };
};

const probit = (p: number): number => -normalQuantile(p);

/** Predictable plug-in normal shift: δ_i = clip((Σ_{j<i} z_j + c δ₀)/(i − 1 + c), 0, 3), e = exp(δ z − δ²/2). */
const pluginShift = (): PBettor => {
  let s = 0;
  let n = 0;
  const delta = (): number => Math.min(3, Math.max(0, (s + 2 * 1) / (n + 2)));
  return {
    value: (p) => Math.exp(delta() * probit(p) - delta() ** 2 / 2),
    observe: (p) => {
      s += probit(p);
      n++;
    },
  };
};

/** A posterior-weighted mixture of bettors (a mixture of their martingales, weights = their values). */
const mixtureOf = (makers: Array<() => PBettor>) => (): PBettor => {
  const bs = makers.map((m) => m());
  const w = bs.map(() => 1);
  return {
    value: (p) => bs.reduce((a, b, j) => a + w[j] * b.value(p), 0) / w.reduce((a, b) => a + b, 0),
    observe: (p) => {
      bs.forEach((b, j) => {
        w[j] *= b.value(p);
        b.observe(p);
      });
      const max = Math.max(...w);
      if (max > 0) w.forEach((_, j) => (w[j] /= max));
    },
  };
};

const shiftGrid = Array.from({ length: 20 }, (_, i) => 0.15 * (i + 1));
const normalShiftMixture = mixtureOf(shiftGrid.map((d) => engineBettor({ kind: 'fixed', calibrator: { kind: 'normal-shift', delta: d } })));
const shrinkageMixture = mixtureOf([2, 5, 15].map((c) => engineBettor({ kind: 'adaptive', shrinkage: c })));

/** Crossing of the average of one bettor per statistic (or one bettor on the overall p). */
function averageCrossing(make: () => PBettor, keys: ReadonlyArray<keyof RunPValues>) {
  return (runs: RunPValues[]): number | null => {
    const bs = keys.map(() => make());
    const m = keys.map(() => 1);
    for (let i = 0; i < runs.length; i++) {
      let avg = 0;
      keys.forEach((k, j) => {
        m[j] *= bs[j].value(runs[i][k]);
        bs[j].observe(runs[i][k]);
        avg += m[j] / keys.length;
      });
      if (avg >= 1 / ALPHA) return i + 1;
    }
    return null;
  };
}

/** The oracle: a fixed Grenander calibrator per statistic fitted to the whole pool (in-sample), floor 0.02. */
function oracle(pool: readonly RunPValues[]) {
  const tables = STATS.map((s) => {
    const counts = new Float64Array(L + 1);
    for (const r of pool) counts[latticeIndex(r[s], L)]++;
    return grenanderOnLattice(counts, pool.length);
  });
  return (runs: RunPValues[]): number | null => {
    const m = [1, 1, 1];
    for (let i = 0; i < runs.length; i++) {
      STATS.forEach((s, j) => (m[j] *= 0.98 * tables[j][latticeIndex(runs[i][s], L)] + 0.02));
      if ((m[0] + m[1] + m[2]) / 3 >= 1 / ALPHA) return i + 1;
    }
    return null;
  };
}

const f2 = (x: number): string => x.toFixed(2);

const alternatives: Array<{ name: string; d: Discrepancy }> = [
  { name: 'shift 3 m', d: { kind: 'shift', size: 3 } },
  { name: 'shift 4.5 m', d: { kind: 'shift', size: 4.5 } },
  { name: 'shift 5.5 m', d: { kind: 'shift', size: 5.5 } },
  { name: 'bump 6 m', d: { kind: 'bump', size: 6, centre: 50, width: 8 } },
  { name: 'wiggle 2 m', d: { kind: 'wiggle', size: 2, cycles: 3 } },
];

console.log(`# Runs to a decision (α = ${ALPHA}, 80 % power for the fixed designs; ${POOL} engine runs per pool, ${REPS} repetitions, cap ${CAP})\n`);
console.log('| alternative | single-run power residual / overall | fixed Fisher, overall p | fixed Fisher per statistic (Bonferroni) | E[runs], 3 statistics (± se) | ratio to overall | ratio to Bonferroni | E[runs], overall p only (previous) | oracle E (ratio) |');
console.log('| --- | --- | --- | --- | --- | --- | --- | --- | --- |');
const others: string[] = [];
const pools = new Map<string, RunPValues[]>();
for (const { name, d } of alternatives) {
  const pool = statisticPool(d, POOL, 4242);
  pools.set(name, pool);
  const power = singleRunPower(pool, ALPHA);
  const overall = fixedDesignRuns(pool, 'fisher-overall', ALPHA, 0.8, REPS, CAP, 11).runs;
  const bonf = fixedDesignRuns(pool, 'fisher-bonferroni', ALPHA, 0.8, REPS, CAP, 11).runs;
  const run = (crossing: (runs: RunPValues[]) => number | null) => runsToDecision(pool, crossing, REPS, CAP, createRng(12));
  const adaptive = run(averageCrossing(engineBettor({ kind: 'adaptive' }), STATS));
  const previous = run(averageCrossing(engineBettor({ kind: 'adaptive' }), ['p']));
  const best = run(oracle(pool));
  const ratio = (e: number, n: number | null): string => (n === null ? `— (fixed > ${CAP})` : f2(e / n));
  console.log(
    `| ${name} | ${f2(power.residual)} / ${f2(power.p)} | ${overall ?? `> ${CAP}`} | ${bonf ?? `> ${CAP}`} | ${f2(adaptive.mean)} ± ${f2(adaptive.se)}${adaptive.reached < 1 ? ` (reached ${(100 * adaptive.reached).toFixed(1)} %)` : ''} | ` +
      `${ratio(adaptive.mean, overall)} | ${ratio(adaptive.mean, bonf)} | ${f2(previous.mean)} (${ratio(previous.mean, overall)}) | ${f2(best.mean)} (${ratio(best.mean, overall)}) |`,
  );
  const strategies: Array<[string, () => PBettor]> = [
    ['power mixture', engineBettor({ kind: 'power-mixture' })],
    ['Vovk–Wang', engineBettor({ kind: 'fixed', calibrator: { kind: 'vovk-wang' } })],
    ['plug-in normal shift', pluginShift],
    ['normal-shift mixture', normalShiftMixture],
    ['mixture over c ∈ {2, 5, 15}', shrinkageMixture],
  ];
  others.push(`| ${name} | ${f2(adaptive.mean)} | ${strategies.map(([, make]) => f2(run(averageCrossing(make, STATS)).mean)).join(' | ')} |`);
}

console.log('\n# Other bettors on the same three statistics: E[runs to 1/α]\n');
console.log('| alternative | adaptive (default) | power mixture | Vovk–Wang | plug-in normal shift | normal-shift mixture | mixture over c |');
console.log('| --- | --- | --- | --- | --- | --- | --- |');
for (const line of others) console.log(line);

// ---------------------------------------------------------------------------------------------
// An event of 12 vignettes, 6 with a level shift of 5.5 m: rounds of one run per vignette.

const shifted = pools.get('shift 5.5 m') ?? [];
const nullPool = statisticPool({ kind: 'none' }, POOL, 4243);
const V = Array.from({ length: 12 }, (_, i) => `V${i + 1}`);
const isShifted = (v: number): boolean => v % 2 === 0;
const EVENT_REPS = Math.max(200, Math.floor(REPS / 4));
const ROUND_CAP = 30;

function eventRound(rng: ReturnType<typeof createRng>): StreamRun[] {
  return V.map((stream, v) => ({ stream, ...(isShifted(v) ? shifted : nullPool)[rng.int(POOL)] }));
}

/** Fixed-sample Fisher over the first n runs of the event (rounds in order): the smallest n with 80 % power. */
let fixedRuns: number | null = null;
{
  const rng = createRng(21);
  const maxRuns = ROUND_CAP * V.length;
  const hits = new Float64Array(maxRuns + 1);
  for (let r = 0; r < EVENT_REPS; r++) {
    const runs = Array.from({ length: ROUND_CAP }, () => eventRound(rng)).flat();
    let stat = 0;
    for (let n = 1; n <= maxRuns; n++) {
      stat += -2 * Math.log(runs[n - 1].p);
      if (chiSquareSfEven(stat, n) <= ALPHA) hits[n]++;
    }
  }
  for (let n = 1; n <= maxRuns && fixedRuns === null; n++) if (hits[n] / EVENT_REPS >= 0.8) fixedRuns = n;
}

console.log(`\n# Event of 12 vignettes, 6 with a level shift of 5.5 m, one run of each per round (${EVENT_REPS} repetitions, cap ${ROUND_CAP} rounds)\n`);
console.log(`Fixed-sample Fisher over the event's overall p-values: ${fixedRuns ?? `> ${ROUND_CAP * V.length}`} runs for 80 % power.\n`);
console.log('| combination over vignettes | evidence after 1 round (median) | Fisher p after 1 round (median) | E[runs to 1/α] | ratio to fixed |');
console.log('| --- | --- | --- | --- | --- |');
for (const combine of ['average', 'product', 'hedge'] as EventCombination[]) {
  const rng = createRng(22);
  const first: number[] = [];
  const fisherFirst: number[] = [];
  let total = 0;
  for (let r = 0; r < EVENT_REPS; r++) {
    const runs: StreamRun[] = [];
    let at = ROUND_CAP * V.length;
    for (let j = 1; j <= ROUND_CAP; j++) {
      runs.push(...eventRound(rng));
      const ev = eventEvidence(runs, ALPHA, undefined, { resolution: L, combine, streams: V });
      if (j === 1) {
        first.push(ev.current);
        fisherFirst.push(ev.fisherFixed?.pValue ?? 1);
      }
      if (ev.crossedAt !== null) {
        at = ev.crossedAt;
        break;
      }
    }
    total += at;
  }
  const median = (xs: number[]): number => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
  const mean = total / EVENT_REPS;
  console.log(`| ${combine} | ${f2(median(first))} | ${median(fisherFirst).toExponential(1)} | ${f2(mean)} | ${fixedRuns === null ? '—' : f2(mean / fixedRuns)} |`);
}
