/**
 * The event plan: channels, vignettes and analysis settings of a test event. The zod schema below is
 * the single source of truth (validation, defaults and the JSON Schema for clients); `parsePlan`
 * maps a valid document to the engine's shapes (`ChannelSpec`, `AnalysisSettings`, `ComponentRule`).
 * JSON by default, YAML when the file name ends in .yaml or .yml.
 */
import { readFile, stat } from 'node:fs/promises';
import { parse as parseYaml, YAMLParseError } from 'yaml';
import { z } from 'zod';
import {
  DEFAULT_ANALYSIS,
  DEFAULT_REGISTRATION,
  type AnalysisSettings,
  type ChannelSpec,
  type ComponentRule,
} from '../engine/types.js';
import { InputError } from './errors.js';
import { disSourceSchema, mappingPlanIssues, type DisSource } from './dis/mapping.js';

/** A plan channel: the engine's ChannelSpec plus the largest plausible rate of change (units/s). */
export interface PlanChannel extends ChannelSpec {
  readonly maxRate?: number;
}

export interface PlanVignette {
  readonly id: string;
  /** Length of the vignette in seconds; samples after it are dropped on ingest. */
  readonly horizon: number;
  readonly label?: string;
  readonly condition?: Readonly<Record<string, string | number>>;
}

export interface EventPlan {
  readonly name: string;
  readonly description?: string;
  readonly channels: PlanChannel[];
  readonly vignettes: PlanVignette[];
  readonly analysis: AnalysisSettings;
}

/** Column names of the track files that channels may not use. */
export const RESERVED_COLUMNS: readonly string[] = ['vignette', 'track', 't'];
const CHANNEL_NAME = /^[A-Za-z_][A-Za-z0-9_]*$/;
/** Longest vignette id (track ids have the same limit in the reader). */
export const MAX_ID_LENGTH = 128;

/**
 * A vignette id must survive an unquoted CSV field that the reader trims: no comma, double quote
 * or control character, and no surrounding whitespace.
 */
function isCsvSafeId(id: string): boolean {
  return id.length > 0 && id.length <= MAX_ID_LENGTH && id.trim() === id && !/[,"\u0000-\u001f\u007f]/.test(id);
}

const positive = () => z.number().gt(0, { error: 'must be > 0' });

const channelSchema = z.strictObject({
  name: z
    .string()
    .regex(CHANNEL_NAME, { error: 'must match /^[A-Za-z_][A-Za-z0-9_]*$/' })
    .refine((n) => !RESERVED_COLUMNS.includes(n), { error: 'is reserved (vignette, track, t)' }),
  unit: z.string(),
  period: positive().optional(),
  tolerance: positive().optional(),
  maxRate: positive().optional(),
});

const vignetteSchema = z.strictObject({
  id: z.string().refine(isCsvSafeId, {
    error: `must be 1..${MAX_ID_LENGTH} characters without commas, double quotes, control characters or surrounding spaces`,
  }),
  horizon: z.number().gt(0, { error: 'must be > 0 seconds' }),
  label: z.string().optional(),
  condition: z
    .record(z.string(), z.union([z.string(), z.number()], { error: 'must be a string or a number' }))
    .optional(),
});

const componentsSchema = z.union(
  [
    z.strictObject({
      varianceFraction: z
        .number()
        .gt(0, { error: 'must be in (0, 1)' })
        .lt(1, { error: 'must be in (0, 1)' }),
    }),
    z.strictObject({ fixed: z.int({ error: 'must be an integer >= 1' }).min(1, { error: 'must be an integer >= 1' }) }),
  ],
  { error: 'must be { "varianceFraction": <number in (0, 1)> } or { "fixed": <integer >= 1> }' },
);

function intIn(lo: number, hi: number) {
  const error = `must be an integer in ${lo}..${hi}`;
  return z.int({ error }).min(lo, { error }).max(hi, { error });
}

function componentsToPlan(rule: ComponentRule): z.input<typeof componentsSchema> {
  return rule.kind === 'variance' ? { varianceFraction: rule.fraction } : { fixed: rule.count };
}

const analysisSchema = z.strictObject({
  alpha: z
    .number()
    .gt(0, { error: 'must be in (0, 0.5]' })
    .lte(0.5, { error: 'must be in (0, 0.5]' })
    .default(DEFAULT_ANALYSIS.alpha),
  components: componentsSchema.default(componentsToPlan(DEFAULT_ANALYSIS.components)),
  gridSize: intIn(16, 2048).default(DEFAULT_ANALYSIS.gridSize),
  segments: intIn(4, 400).default(DEFAULT_ANALYSIS.segments),
  combination: z
    .enum(['fisher', 'stouffer', 'tippett', 'cauchy'], {
      error: 'must be one of "fisher", "stouffer", "tippett", "cauchy"',
    })
    .default(DEFAULT_ANALYSIS.combination),
  gapFactor: z.number().gt(1, { error: 'must be > 1' }).default(DEFAULT_ANALYSIS.gapFactor),
  seed: z
    .int({ error: 'must be an integer' })
    .min(0, { error: 'must be an integer in [0, 4294967295]' })
    .max(4294967295, { error: 'must be an integer in [0, 4294967295]' })
    .default(DEFAULT_ANALYSIS.seed ?? 1)
    .describe('seed of the tie-breaking draws and Monte Carlo calibrations: the same plan and data give the same p-values'),
  registration: z
    .strictObject({
      span: z
        .number()
        .gt(0, { error: 'must be in (0, 0.5]' })
        .lte(0.5, { error: 'must be in (0, 0.5]' })
        .default(DEFAULT_REGISTRATION.span)
        .describe('largest time lag searched when a discrepancy is diagnosed, as a fraction of the vignette horizon'),
    })
    .prefault({})
    .describe('time registration of the diagnosis: a time shift, or a smooth monotone time warp, of the live run onto the simulated mean'),
});

/** Report the second and later occurrences of a key in a list as `[index, field]` issues. */
function uniqueBy<T>(key: (item: T) => string, field: string, what: string) {
  return (items: T[], ctx: z.core.$RefinementCtx<T[]>): void => {
    const seen = new Set<string>();
    items.forEach((item, i) => {
      const k = key(item);
      if (seen.has(k)) {
        ctx.addIssue({ code: 'custom', message: `duplicate ${what} ${JSON.stringify(k)}`, path: [i, field], input: k });
      }
      seen.add(k);
    });
  };
}

/** The plan document schema (input side: what a plan file may contain). */
export const planSchema = z.strictObject({
  name: z.string().min(1, { error: 'must not be empty' }),
  description: z.string().optional(),
  channels: z
    .array(channelSchema)
    .min(1, { error: 'must list at least one channel' })
    .superRefine(uniqueBy((c) => c.name, 'name', 'channel name')),
  vignettes: z
    .array(vignetteSchema)
    .min(1, { error: 'must list at least one vignette' })
    .superRefine(uniqueBy((v) => v.id, 'id', 'vignette id')),
  analysis: analysisSchema.prefault({}),
  sources: z
    .strictObject({
      dis: disSourceSchema.optional().describe('DIS Entity State PDUs received by `plumbline serve` (ingest/dis/)'),
    })
    .optional()
    .describe('live sources that `plumbline serve` runs in its own process; not part of the event (not recorded in the journal)'),
}).superRefine((doc, ctx) => {
  const dis = doc.sources?.dis;
  if (!dis) return;
  for (const issue of mappingPlanIssues(dis, doc).issues) ctx.addIssue({ code: 'custom', path: ['sources', 'dis', ...issue.path], message: issue.message, input: dis });
});

/** The plan's live sources (`sources` in the plan file). */
export interface PlanSources {
  readonly dis?: DisSource;
}

export type PlanDocument = z.input<typeof planSchema>;

/** JSON Schema of the plan file (input side), for editors and clients. */
export function planJsonSchema(): Record<string, unknown> {
  return z.toJSONSchema(planSchema, { io: 'input' });
}

/** `analysis.alpha`, `channels[1].name`; '(root)' for the document itself. */
function formatPath(path: readonly PropertyKey[]): string {
  let out = '';
  for (const part of path) {
    if (typeof part === 'number') out += `[${part}]`;
    else out += out === '' ? String(part) : `.${String(part)}`;
  }
  return out === '' ? '(root)' : out;
}

function toEventPlan(doc: z.output<typeof planSchema>): EventPlan {
  const a = doc.analysis;
  const components: ComponentRule =
    'fixed' in a.components
      ? { kind: 'fixed', count: a.components.fixed }
      : { kind: 'variance', fraction: a.components.varianceFraction };
  return {
    name: doc.name,
    ...(doc.description !== undefined && { description: doc.description }),
    channels: doc.channels.map((c) => ({ ...c })),
    vignettes: doc.vignettes.map((v) => ({ ...v })),
    analysis: {
      alpha: a.alpha,
      components,
      gridSize: a.gridSize,
      segments: a.segments,
      combination: a.combination,
      gapFactor: a.gapFactor,
      seed: a.seed,
      registration: { span: a.registration.span },
    },
  };
}

/** 1-based line of a character offset. */
function lineOf(text: string, offset: number): number {
  let line = 1;
  for (let i = 0; i < offset && i < text.length; i++) if (text.charCodeAt(i) === 10) line++;
  return line;
}

function parseDocument(text: string, fileName: string): unknown {
  if (/\.ya?ml$/i.test(fileName)) {
    try {
      return parseYaml(text);
    } catch (e) {
      if (e instanceof YAMLParseError) {
        const line = e.linePos?.[0]?.line;
        throw new InputError('PLAN_SYNTAX', { file: fileName, line, reason: `invalid YAML: ${e.message.split('\n')[0].replace(/:$/, '')}` });
      }
      // Resource limits of the YAML parser (alias expansion, nesting) are syntax errors too.
      throw new InputError('PLAN_SYNTAX', { file: fileName, reason: `YAML refused: ${e instanceof Error ? e.message.split('\n')[0] : String(e)}` });
    }
  }
  try {
    return JSON.parse(text);
  } catch (e) {
    if (e instanceof SyntaxError) {
      const pos = /position (\d+)/.exec(e.message);
      const line = pos ? lineOf(text, Number(pos[1])) : undefined;
      throw new InputError('PLAN_SYNTAX', { file: fileName, line, reason: `invalid JSON: ${e.message}` });
    }
    throw new InputError('PLAN_SYNTAX', { file: fileName, reason: `JSON refused: ${e instanceof Error ? e.message : String(e)}` });
  }
}

/**
 * Parse and validate a plan. Throws InputError 'PLAN_SYNTAX' for malformed JSON/YAML and
 * 'PLAN_INVALID' listing every schema issue as `path: message` (also in `error.issues`).
 */
export function parsePlan(text: string, fileName: string): EventPlan {
  return parsePlanWithSources(text, fileName).plan;
}

/** `parsePlan`, also giving the plan's live sources (which are not part of the `EventPlan`). */
export function parsePlanWithSources(text: string, fileName: string): { plan: EventPlan; sources: PlanSources } {
  const doc = parseDocument(text.replace(/^\uFEFF/, ''), fileName);
  const result = planSchema.safeParse(doc);
  if (!result.success) {
    const issues = result.error.issues.map((i) => `${formatPath(i.path)}: ${i.message}`);
    throw new InputError('PLAN_INVALID', { file: fileName, reason: issues.join('; '), issues });
  }
  return { plan: toEventPlan(result.data), sources: { ...(result.data.sources?.dis && { dis: result.data.sources.dis }) } };
}

/** Largest plan file read, bytes (a plan of hundreds of vignettes is tens of kilobytes). */
export const MAX_PLAN_BYTES = 4 * 1024 * 1024;

/** Read and parse a plan file; an unreadable file is InputError 'PLAN_UNREADABLE'. */
export async function loadPlan(path: string): Promise<EventPlan> {
  return (await loadPlanWithSources(path)).plan;
}

/** `loadPlan`, also giving the plan's live sources. */
export async function loadPlanWithSources(path: string): Promise<{ plan: EventPlan; sources: PlanSources }> {
  let text: string;
  try {
    const size = (await stat(path)).size;
    if (size > MAX_PLAN_BYTES) {
      throw new InputError('PLAN_UNREADABLE', { file: path, reason: `the plan is ${size} bytes; a plan is at most ${MAX_PLAN_BYTES} bytes (is this the right file?)` });
    }
    text = await readFile(path, 'utf8');
  } catch (e) {
    if (e instanceof InputError) throw e;
    const reason = e instanceof Error ? e.message : String(e);
    throw new InputError('PLAN_UNREADABLE', { file: path, reason: `cannot read plan: ${reason}` });
  }
  return parsePlanWithSources(text, path);
}
