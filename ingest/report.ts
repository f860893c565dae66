/**
 * The assessment document: what `plumbline assess` writes and what the live service exports. The
 * zod schema is its definition (the JSON Schema comes from it: `plumbline schema assessment`);
 * `buildReport` turns the engine's results into it, so both paths write the same numbers.
 */
import { z } from 'zod';
import { holmAdjust, type Combined } from '../engine/combine.js';
import type { StatisticsCombined } from '../engine/combine-statistics.js';
import type { Diagnosis } from '../engine/diagnosis.js';
import type { ChannelDifference } from '../engine/practical.js';
import type { EventAssessment, ModelSummary, RunOutcome } from '../engine/event.js';
import type { EventPlan } from './plan.js';
import type { ReadReport } from './tracks-reader.js';

export const REPORT_FORMAT = 'plumbline.assessment';
export const REPORT_VERSION = 1;

export const CAUTIONS: readonly string[] = [
  'Statistical agreement is evidence, not accreditation.',
  "The decision to accept a model for an intended use rests with the program's responsible authority and its test plan.",
  'A non-significant result with few live runs is not proof of agreement: it may only mean the test had little power.',
];

const statistic = z.object({
  value: z.number().describe('distance in scaled units (each channel divided by its scale)'),
  pValue: z.number().gt(0).lte(1).describe('smoothed Monte Carlo rank p-value (#{sim > live} + U·(1 + #{sim = live})) / (N + 1), U uniform on (0, 1] from the seeded generator; every simulated run judged by the model of the others'),
});

const combinedOne = z.object({
  method: z.enum(['fisher', 'stouffer', 'tippett', 'cauchy']),
  statistic: z.number(),
  pValue: z.number().gte(0).lte(1),
  count: z.number().int().positive().describe('number of runs combined'),
});

const combined = combinedOne
  .extend({
    statistic: z.number().describe('the smallest of the three per-statistic combined p-values'),
    pValue: z.number().gte(0).lte(1).describe('that minimum calibrated by Monte Carlo with the simulated runs as pseudo-live runs (valid for the three statistics together)'),
    byStatistic: z.object({ l2: combinedOne, score: combinedOne, residual: combinedOne }).describe("each statistic's per-run p-values combined across the runs by the plan's method"),
    leading: z.enum(['l2', 'score', 'residual']).describe('the statistic with the smallest combined p-value'),
    draws: z.number().int().describe('Monte Carlo draws of the calibration'),
    bound: z.boolean().describe('no draw reached the observed value: pValue is min(1/(draws + 1), 3 × statistic)'),
  })
  .describe('fixed-sample combination: valid for a number of runs fixed in advance');

const readSummary = z.object({
  file: z.string(),
  rows: z.number().int(),
  accepted: z.number().int(),
  skipped: z.number().int(),
  duplicates: z.number().int(),
  beyondHorizon: z.number().int(),
  tracks: z.number().int(),
  errors: z.array(z.string()).describe('first refused rows (with --skip-bad-rows)'),
});

export const runReportSchema = z.object({
  vignette: z.string(),
  track: z.string(),
  samples: z.number().int(),
  status: z.enum(['assessed', 'not-assessable']),
  reason: z.string().optional().describe('why a run could not be judged'),
  span: z.tuple([z.number(), z.number()]).optional().describe('first and last sample time, s'),
  judgedIntervals: z.array(z.tuple([z.number(), z.number()])).optional().describe('parts of [0, horizon] the run was judged on, s'),
  gaps: z.array(z.tuple([z.number(), z.number()])).optional().describe('dropouts longer than the gap threshold, s'),
  flags: z.array(z.enum(['partial', 'dropout', 'few-samples'])),
  simsUsed: z.number().int().optional(),
  statistics: z.object({ l2: statistic, score: statistic, residual: statistic }).optional(),
  overall: z.object({ pValue: z.number().gt(0).lte(1) }).optional().describe('calibrated minimum of the three p-values'),
  components: z.number().int().optional(),
  varianceExplained: z.number().optional(),
  rmsDeviation: z.record(z.string(), z.number()).optional().describe('RMS deviation from the simulated mean over the judged window, per channel, in channel units'),
  smoothing: z
    .array(z.object({ channel: z.string(), lambda: z.number(), edf: z.number(), sigma: z.number() }))
    .optional()
    .describe('P-spline fit per channel: GCV smoothing parameter, effective degrees of freedom, residual sd'),
  practical: z
    .array(
      z.object({
        channel: z.string(),
        unit: z.string(),
        leavesBand: z.boolean().describe('the run is outside the simulated pointwise 95 % band somewhere in its window'),
        maxExcess: z.number().describe('largest distance outside the band, channel units'),
        maxExcessAt: z.number().optional().describe('track time of the largest excess, s'),
        timeOutside: z.number().describe('time spent outside the band, s'),
        integratedExcess: z.number().describe('integral of the excess over time, units·s'),
        maxDeviation: z.number().describe('largest signed deviation from the simulated mean, channel units'),
        maxDeviationAt: z.number().describe('its track time, s'),
        tolerance: z.number().optional().describe("the plan's tolerance for the channel"),
        withinTolerance: z.boolean().optional().describe('inside the band widened by the tolerance (practical equivalence); absent without a tolerance'),
      }),
    )
    .optional()
    .describe('practical difference in physical units: a separate answer from statistical distinguishability'),
  diagnosis: z
    .object({
      kind: z.enum(['level', 'shape', 'fine', 'timing', 'spread', 'none']),
      reason: z.string(),
      timeShift: z
        .number()
        .optional()
        .describe('for timing: how late the live run is, in seconds (> 0: late, < 0: early): the best time shift, or for a time warp the lag at the end of its window'),
      timeShiftInterval: z
        .tuple([z.number(), z.number()])
        .optional()
        .describe('for timing: 1 - alpha interval for timeShift, from the simulated runs\' own registrations (their natural timing scatter)'),
      timing: z.enum(['shift', 'warp']).optional().describe('for timing: the registration that explains the run, a constant time shift or a smooth monotone time warp'),
      lagBuildsUp: z
        .tuple([z.number(), z.number()])
        .optional()
        .describe('for a time warp: times of the live run (s) by which 10 % and 90 % of the lag had built up'),
      levelShift: z.array(z.number()).optional().describe('for level: per-channel offset, channel units'),
    })
    .optional()
    .describe('dominant kind of discrepancy, for runs whose overall p-value is at most alpha'),
});

export const assessmentReportSchema = z.object({
  format: z.literal(REPORT_FORMAT),
  version: z.literal(REPORT_VERSION),
  plan: z.object({
    name: z.string(),
    alpha: z.number(),
    combination: z.enum(['fisher', 'stouffer', 'tippett', 'cauchy']),
    components: z.union([z.object({ varianceFraction: z.number() }), z.object({ fixed: z.number().int() })]),
    gridSize: z.number().int(),
    segments: z.number().int(),
    channels: z.array(z.object({ name: z.string(), unit: z.string() })),
  }),
  inputs: z.object({ baseline: readSummary.optional(), live: readSummary.optional() }),
  vignettes: z.array(
    z.object({
      id: z.string(),
      label: z.string().optional(),
      horizon: z.number(),
      status: z.enum(['ready', 'no-baseline']),
      reason: z.string().optional(),
      model: z
        .object({
          sims: z.number().int(),
          excludedSims: z.number().int(),
          components: z.number().int(),
          varianceExplained: z.number(),
          eigenvalues: z.array(z.number()),
          channelScales: z.record(z.string(), z.number()),
        })
        .optional(),
      runs: z.number().int(),
      combined: combined.optional(),
      adjustedPValue: z.number().optional().describe("the vignette's combined p-value after Holm's adjustment over the event's vignettes"),
      verdict: z.enum(['distinguishable', 'not distinguishable', 'not judged']).describe('adjusted p-value <= alpha: the live runs of this condition are distinguishable from its simulation'),
    }),
  ),
  runs: z.array(runReportSchema),
  combined: combined
    .extend({ alpha: z.number(), distinguishable: z.boolean().describe('combined p-value <= alpha') })
    .optional(),
  sequential: z
    .object({
      threshold: z.number().describe('1/alpha'),
      evidence: z
        .number()
        .describe("the event's evidence after the last run: per statistic (l2, score, residual), half the product and half the average of the vignettes' test martingales, averaged over the three statistics (a test martingale)"),
      established: z.boolean(),
      crossedAt: z.number().nullable().describe('the run (in completion order, 1-based) at which the evidence reached 1/alpha'),
      statistics: z
        .object({ l2: z.number(), score: z.number(), residual: z.number() })
        .optional()
        .describe("each statistic's share of the event's evidence: its vignettes' test martingales combined (the headline is their average)"),
      vignettes: z.array(z.object({ id: z.string(), evidence: z.number(), established: z.boolean(), runs: z.number().int(), advice: z.string() })),
      advice: z.string(),
      note: z.string(),
    })
    .optional()
    .describe('anytime-valid evidence: valid however the team decided when to stop or add runs (the fixed-sample combination above is not)'),
  log: z
    .array(z.object({ at: z.number(), kind: z.enum(['note', 'flag', 'event']), vignette: z.string().optional(), track: z.string().optional(), t: z.number().optional(), text: z.string(), author: z.string().optional() }))
    .optional()
    .describe('analyst notes, data-quality flags and run events, oldest first (live service)'),
  cautions: z.array(z.string()),
});

export type AssessmentReport = z.infer<typeof assessmentReportSchema>;
export type RunReport = z.infer<typeof runReportSchema>;

function readSummaryOf(r: ReadReport): z.infer<typeof readSummary> {
  return {
    file: r.file,
    rows: r.rows,
    accepted: r.accepted,
    skipped: r.skipped,
    duplicates: r.duplicates,
    beyondHorizon: r.beyondHorizon,
    tracks: r.tracks,
    errors: r.errors.map((e) => e.message),
  };
}

export type PracticalRow = NonNullable<RunReport['practical']>[number];
export type DiagnosisRow = NonNullable<RunReport['diagnosis']>;

/** The practical difference without its band arrays (for documents and dashboards). */
export function practicalRows(diffs: readonly ChannelDifference[]): PracticalRow[] {
  return diffs.map((d) => ({
    channel: d.name,
    unit: d.unit,
    leavesBand: d.excursion.leaves,
    maxExcess: d.excursion.maxExcess,
    maxExcessAt: d.excursion.maxExcessAt,
    timeOutside: d.excursion.timeOutside,
    integratedExcess: d.excursion.integratedExcess,
    maxDeviation: d.deviation.value,
    maxDeviationAt: d.deviation.at,
    tolerance: d.tolerance,
    withinTolerance: d.withinTolerance,
  }));
}

export function diagnosisRow(d: Diagnosis): DiagnosisRow {
  return {
    kind: d.kind,
    reason: d.reason,
    timeShift: d.kind === 'timing' ? (d.timing?.lag ?? d.evidence.timing.shift) : undefined,
    // JSON has no infinities: an interval with an open end (too few simulated runs for the level) is left out.
    timeShiftInterval: d.timing && d.timing.interval.every(Number.isFinite) ? [d.timing.interval[0], d.timing.interval[1]] : undefined,
    timing: d.timing?.model,
    lagBuildsUp: d.timing?.buildUp ? [d.timing.buildUp[0], d.timing.buildUp[1]] : undefined,
    levelShift: d.kind === 'level' ? [...d.evidence.level.shift] : undefined,
  };
}

export function runReport(plan: EventPlan, run: RunOutcome): RunReport {
  const a = run.assessment;
  if (!a) {
    return { vignette: run.vignette, track: run.track, samples: run.samples, status: 'not-assessable', reason: run.error, flags: [] };
  }
  const r = a.result;
  return {
    vignette: run.vignette,
    track: run.track,
    samples: run.samples,
    status: 'assessed',
    span: [a.window.span[0], a.window.span[1]],
    judgedIntervals: a.window.intervals.map(([x, y]) => [x, y] as [number, number]),
    gaps: a.window.gaps.map(([x, y]) => [x, y] as [number, number]),
    flags: [...a.flags],
    simsUsed: a.simsUsed,
    statistics: {
      l2: { value: r.live.l2, pValue: r.pValues.l2 },
      score: { value: r.live.score, pValue: r.pValues.score },
      residual: { value: r.live.residual, pValue: r.pValues.residual },
    },
    overall: { pValue: r.pValues.overall },
    components: r.model.eigenvalues.length,
    varianceExplained: r.model.varianceExplained,
    rmsDeviation: Object.fromEntries(plan.channels.map((c, i) => [c.name, run.rms?.[i] ?? Number.NaN])),
    smoothing: a.smoothing.map((f, i) => ({ channel: plan.channels[i].name, lambda: f.lambda, edf: f.edf, sigma: f.sigma })),
    practical: run.practical ? practicalRows(run.practical) : undefined,
    diagnosis: run.diagnosis ? diagnosisRow(run.diagnosis) : undefined,
  };
}

export type Verdict = 'distinguishable' | 'not distinguishable' | 'not judged';

/**
 * Per-vignette verdicts: each judged vignette's combined p-value adjusted by Holm over the judged
 * vignettes of the event, compared with alpha.
 */
export function vignetteVerdicts(vignettes: ReadonlyArray<{ readonly id: string; readonly combined?: Combined }>, alpha: number): Map<string, { adjustedPValue?: number; verdict: Verdict }> {
  const judged = vignettes.filter((v) => v.combined);
  const adjusted = holmAdjust(judged.map((v) => v.combined?.pValue ?? 1));
  const out = new Map<string, { adjustedPValue?: number; verdict: Verdict }>();
  for (const v of vignettes) out.set(v.id, { verdict: 'not judged' });
  judged.forEach((v, i) => out.set(v.id, { adjustedPValue: adjusted[i], verdict: adjusted[i] <= alpha ? 'distinguishable' : 'not distinguishable' }));
  return out;
}

export interface ReportVignette {
  readonly id: string;
  readonly horizon: number;
  readonly summary?: ModelSummary;
  readonly error?: string;
  readonly combined?: StatisticsCombined;
}

/** Assemble the document from per-run rows (the live service keeps rows; the batch path makes them). */
export function assembleReport(
  plan: EventPlan,
  vignettes: readonly ReportVignette[],
  runs: readonly RunReport[],
  combinedAll: StatisticsCombined | undefined,
  inputs: { baseline?: ReadReport; live?: ReadReport },
  extras: { sequential?: AssessmentReport['sequential']; log?: AssessmentReport['log'] } = {},
): AssessmentReport {
  const s = plan.analysis;
  const comps = s.components.kind === 'variance' ? { varianceFraction: s.components.fraction } : { fixed: s.components.count };
  const verdicts = vignetteVerdicts(vignettes, s.alpha);
  return {
    format: REPORT_FORMAT,
    version: REPORT_VERSION,
    plan: {
      name: plan.name,
      alpha: s.alpha,
      combination: s.combination,
      components: comps,
      gridSize: s.gridSize,
      segments: s.segments,
      channels: plan.channels.map((c) => ({ name: c.name, unit: c.unit })),
    },
    inputs: {
      baseline: inputs.baseline ? readSummaryOf(inputs.baseline) : undefined,
      live: inputs.live ? readSummaryOf(inputs.live) : undefined,
    },
    vignettes: vignettes.map((v) => {
      const pv = plan.vignettes.find((x) => x.id === v.id);
      return {
        id: v.id,
        label: pv?.label,
        horizon: v.horizon,
        status: v.summary ? 'ready' : 'no-baseline',
        reason: v.error,
        model: v.summary
          ? {
              ...v.summary,
              channelScales: Object.fromEntries(plan.channels.map((c, i) => [c.name, v.summary?.channelScales[i] ?? Number.NaN])),
            }
          : undefined,
        runs: runs.filter((r) => r.vignette === v.id).length,
        combined: v.combined,
        ...(verdicts.get(v.id) ?? { verdict: 'not judged' as const }),
      };
    }),
    runs: [...runs],
    combined: combinedAll ? { ...combinedAll, alpha: s.alpha, distinguishable: combinedAll.pValue <= s.alpha } : undefined,
    sequential: extras.sequential,
    log: extras.log,
    cautions: [...CAUTIONS],
  };
}

export function buildReport(plan: EventPlan, event: EventAssessment, inputs: { baseline?: ReadReport; live?: ReadReport }): AssessmentReport {
  return assembleReport(
    plan,
    event.vignettes,
    event.runs.map((r) => runReport(plan, r)),
    event.combined,
    inputs,
  );
}
