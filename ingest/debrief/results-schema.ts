/**
 * results.json of the debrief package: the zod schema is its definition (`plumbline schema
 * results` prints the JSON Schema). It holds the assessment document unchanged (`assessment`, the
 * same numbers as `plumbline assess` and the service's /api/export) and what the debrief adds: the
 * state of the event when the package was made, the headline with its method, the anytime-valid
 * evidence after each run, and the short advice per vignette.
 */
import { z } from 'zod';
import { assessmentReportSchema } from '../report.js';

export const RESULTS_FORMAT = 'plumbline.debrief';
export const RESULTS_VERSION = 1;

const combined = z.object({
  method: z.enum(['fisher', 'stouffer', 'tippett', 'cauchy']),
  statistic: z.number(),
  pValue: z.number().gte(0).lte(1),
  count: z.number().int().positive().describe('number of runs combined'),
});

export const resultsSchema = z.object({
  format: z.literal(RESULTS_FORMAT),
  version: z.literal(RESULTS_VERSION),
  generatedAt: z.string().describe('when the package was made (ISO 8601, UTC); the only value that differs between two packages of the same journal'),
  source: z.object({ kind: z.enum(['journal', 'service', 'document']), name: z.string().describe('file name or service address') }),
  event: z.object({
    complete: z.boolean().describe('no run in flight and every vignette of the plan has at least one judged run'),
    runsCompleted: z.number().int().describe('live runs with a final judgement'),
    runsInFlight: z.array(z.object({ vignette: z.string(), track: z.string(), lastT: z.number().describe('track time reached, s') })),
    vignettesWithoutRuns: z.array(z.string()),
    status: z.string().describe('the same in words (first page of the report)'),
  }),
  headline: z.object({
    alpha: z.number(),
    method: z.enum(['fisher', 'stouffer', 'tippett', 'cauchy']),
    runs: z.number().int(),
    verdict: z.enum(['distinguishable', 'not distinguishable', 'not judged']).describe('the combined overall p-value <= alpha'),
    overall: combined.optional().describe("the runs' overall (calibrated minimum) p-values combined"),
    perStatistic: z.object({ l2: combined.optional(), score: combined.optional(), residual: combined.optional() }).describe("each statistic's per-run p-values combined by the plan's method"),
    basis: z.string().describe('where the values come from, in words'),
  }),
  evidence: z
    .object({
      threshold: z.number(),
      current: z.number(),
      established: z.boolean(),
      crossedAt: z.number().nullable(),
      afterEachRun: z.array(z.number()).describe("the event's test martingale after each completed run, in completion order"),
    })
    .optional()
    .describe('anytime-valid evidence (absent for a debrief made from a document alone)'),
  advice: z.array(z.object({ vignette: z.string(), short: z.string(), full: z.string() })).describe('per vignette: the short advice line and the full explanation'),
  assessment: assessmentReportSchema,
});

export type DebriefResults = z.infer<typeof resultsSchema>;

export function resultsJsonSchema(): unknown {
  return z.toJSONSchema(resultsSchema, { io: 'output' });
}
