/**
 * The assessment document: what `plumbline assess` writes and what the live service exports. The
 * zod schema is its definition (the JSON Schema comes from it: `plumbline schema assessment`);
 * `buildReport` turns the engine's results into it, so both paths write the same numbers.
 */
import { z } from 'zod';
import type { Combined } from '../engine/combine.js';
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
  pValue: z.number().gt(0).lte(1).describe('Monte Carlo rank p-value (1 + #{sim >= live}) / (N + 1), full-conformal'),
});

const combined = z.object({
  method: z.enum(['fisher', 'stouffer', 'tippett', 'cauchy']),
  statistic: z.number(),
  pValue: z.number().gte(0).lte(1),
  count: z.number().int().positive().describe('number of runs combined'),
});

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
    }),
  ),
  runs: z.array(runReportSchema),
  combined: combined
    .extend({ alpha: z.number(), distinguishable: z.boolean().describe('combined p-value <= alpha') })
    .optional(),
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
  };
}

export interface ReportVignette {
  readonly id: string;
  readonly horizon: number;
  readonly summary?: ModelSummary;
  readonly error?: string;
  readonly combined?: Combined;
}

/** Assemble the document from per-run rows (the live service keeps rows; the batch path makes them). */
export function assembleReport(
  plan: EventPlan,
  vignettes: readonly ReportVignette[],
  runs: readonly RunReport[],
  combinedAll: Combined | undefined,
  inputs: { baseline?: ReadReport; live?: ReadReport },
): AssessmentReport {
  const s = plan.analysis;
  const comps = s.components.kind === 'variance' ? { varianceFraction: s.components.fraction } : { fixed: s.components.count };
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
      };
    }),
    runs: [...runs],
    combined: combinedAll ? { ...combinedAll, alpha: s.alpha, distinguishable: combinedAll.pValue <= s.alpha } : undefined,
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
