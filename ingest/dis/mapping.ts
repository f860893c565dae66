/**
 * The DIS mapping file: which DIS entities are runs of which vignettes, where the sensor sites
 * are, and how a geocentric position becomes the plan's channels. JSON by default, YAML when the
 * file name ends in .yaml or .yml. The zod schema below is the definition.
 *
 *   {
 *     "sites": { "north-mast": { "lat": 10.5, "lon": 20.25, "height": 32 } },
 *     "channels": { "range": "range", "bearing": "bearing" },
 *     "entities": [
 *       { "exercise": 1, "site": 10, "application": 20, "entity": 7,
 *         "vignette": "S1-L1", "track": "usv-7", "sensor": "north-mast", "conversion": "range-bearing" }
 *     ]
 *   }
 *
 * `channels` maps each plan channel to a quantity of the conversion: 'range-bearing' gives range
 * (m), bearing (deg, clockwise from true north) and elevation (deg); 'enu' gives east, north, up (m)
 * at the sensor site. Without `channels`, each plan channel takes the quantity of the same name.
 * `exercise` may be left out to accept the entity from any exercise.
 */
import { readFile } from 'node:fs/promises';
import { isIP } from 'node:net';
import { parse as parseYaml } from 'yaml';
import { z } from 'zod';
import type { EventPlan } from '../plan.js';
import type { Geodetic } from './geodesy.js';
import { isMulticast, parseListen } from './listen.js';

export const QUANTITIES = {
  'range-bearing': ['range', 'bearing', 'elevation'],
  enu: ['east', 'north', 'up'],
} as const;
export type Conversion = keyof typeof QUANTITIES;
export type Quantity = (typeof QUANTITIES)[Conversion][number];

const u16 = z.int().min(0).max(65535);
const id = z.string().min(1).max(128).regex(/^[^,"\u0000-\u001f\u007f]+$/, { error: 'must not contain commas, double quotes or control characters' });

const siteSchema = z.strictObject({
  lat: z.number().min(-90).max(90).describe('geodetic latitude, degrees north (WGS 84)'),
  lon: z.number().min(-180).max(180).describe('longitude, degrees east (WGS 84)'),
  height: z.number().min(-12000).max(100000).describe('height above the WGS 84 ellipsoid, m'),
});

const entitySchema = z.strictObject({
  exercise: z.int().min(0).max(255).optional().describe('DIS exercise id; absent: any exercise'),
  site: u16.describe('DIS entity id: site number'),
  application: u16.describe('DIS entity id: application number'),
  entity: u16.describe('DIS entity id: entity number'),
  vignette: id,
  track: id.describe('run id; a reappearance after the run closed becomes <track>-r2, -r3, ...'),
  source: z.enum(['live', 'sim']).default('live'),
  sensor: z.string().min(1).describe('a key of "sites"'),
  conversion: z.enum(['range-bearing', 'enu']).default('range-bearing'),
});

const mappingShape = {
  sites: z.record(z.string().min(1), siteSchema).describe('sensor sites by name'),
  channels: z
    .record(z.string(), z.enum(['range', 'bearing', 'elevation', 'east', 'north', 'up']))
    .optional()
    .describe('the quantity behind each plan channel; absent: the quantity of the same name'),
  entities: z.array(entitySchema).min(1).describe('the DIS entities that are runs'),
};

/** Every entity's sensor is a site; no entity is mapped twice. */
function checkEntities(m: { sites: Record<string, unknown>; entities: ReadonlyArray<z.output<typeof entitySchema>> }, ctx: z.core.$RefinementCtx<unknown>): void {
  const seen = new Set<string>();
  m.entities.forEach((e, i) => {
    if (!(e.sensor in m.sites)) ctx.addIssue({ code: 'custom', path: ['entities', i, 'sensor'], message: `unknown site ${JSON.stringify(e.sensor)}`, input: e.sensor });
    const k = `${e.exercise ?? '*'}:${e.site}:${e.application}:${e.entity}`;
    if (seen.has(k)) ctx.addIssue({ code: 'custom', path: ['entities', i], message: `entity ${e.site}:${e.application}:${e.entity} is mapped twice`, input: k });
    seen.add(k);
  });
}

export const disMappingSchema = z.strictObject(mappingShape).superRefine(checkEntities);

/** Default seconds without a PDU after which a run closes (`BRIDGE_DEFAULTS.silence`). */
export const DEFAULT_SILENCE = 10;

function listenProblem(url: string): string | undefined {
  try {
    parseListen(url, 'listen');
    return undefined;
  } catch (e) {
    return e instanceof Error ? e.message : String(e);
  }
}

/**
 * The plan's `sources.dis` block: where `plumbline serve` listens for DIS Entity State PDUs, and the
 * mapping (as in the mapping file) with the silence that closes a run.
 */
export const disSourceSchema = z
  .strictObject({
    listen: z
      .string()
      .superRefine((url, ctx) => {
        const problem = listenProblem(url);
        if (problem) ctx.addIssue({ code: 'custom', message: problem, input: url });
      })
      .describe('udp://HOST:PORT: a unicast address of this host, 0.0.0.0 or [::] for any (broadcast), or a multicast group to join; `serve --dis` overrides it'),
    interface: z
      .string()
      .refine((a) => isIP(a) !== 0, { error: 'must be an IP address of this host' })
      .optional()
      .describe('with a multicast group: the address of the interface to join it on; absent: the system\'s choice'),
    silence: z.number().gt(0, { error: 'must be > 0 seconds' }).default(DEFAULT_SILENCE).describe('seconds without a PDU after which a run closes'),
    ...mappingShape,
  })
  .superRefine((d, ctx) => {
    checkEntities(d, ctx);
    if (d.interface !== undefined && listenProblem(d.listen) === undefined && !isMulticast(parseListen(d.listen).host)) {
      ctx.addIssue({ code: 'custom', path: ['interface'], message: 'goes with a multicast group address in "listen"', input: d.interface });
    }
  });

export type DisSourceDocument = z.input<typeof disSourceSchema>;
export type DisSource = z.output<typeof disSourceSchema>;

export type DisMappingDocument = z.input<typeof disMappingSchema>;
export type DisMapping = z.output<typeof disMappingSchema>;
export type DisMappedEntity = DisMapping['entities'][number];

export class DisMappingError extends Error {
  constructor(
    readonly code: 'MAPPING_UNREADABLE' | 'MAPPING_SYNTAX' | 'MAPPING_INVALID' | 'MAPPING_PLAN',
    message: string,
    readonly issues: readonly string[] = [],
  ) {
    super(message);
    this.name = 'DisMappingError';
  }
}

/** A mapping entry resolved against the plan: its site and the quantity behind each plan channel. */
export interface ResolvedEntity extends DisMappedEntity {
  readonly siteLocation: Geodetic;
  /** Per plan channel (plan order), the quantity that fills it. */
  readonly quantities: readonly Quantity[];
}

/** A problem of a mapping against the plan: where (path in the mapping) and what. */
export interface MappingPlanIssue {
  readonly path: Array<string | number>;
  readonly message: string;
}

/**
 * Check a mapping against the plan's channels and vignettes: every vignette exists, and every plan
 * channel maps to a quantity that the entry's conversion gives. Also returns, per entry, the
 * quantity behind each plan channel.
 */
export function mappingPlanIssues(
  mapping: Pick<DisMapping, 'channels' | 'entities'>,
  plan: { readonly channels: ReadonlyArray<{ readonly name: string }>; readonly vignettes: ReadonlyArray<{ readonly id: string }> },
): { issues: MappingPlanIssue[]; quantities: Quantity[][] } {
  const issues: MappingPlanIssue[] = [];
  const vignettes = new Set(plan.vignettes.map((v) => v.id));
  const quantities = mapping.entities.map((e, i) => {
    if (!vignettes.has(e.vignette)) issues.push({ path: ['entities', i, 'vignette'], message: `${JSON.stringify(e.vignette)} is not a vignette of the plan` });
    const offered: readonly string[] = QUANTITIES[e.conversion];
    return plan.channels.map((c) => {
      const q = mapping.channels?.[c.name] ?? c.name;
      if (!offered.includes(q)) issues.push({ path: ['entities', i], message: `plan channel ${JSON.stringify(c.name)} needs quantity ${JSON.stringify(q)}, which conversion "${e.conversion}" does not give (${offered.join(', ')})` });
      return q as Quantity;
    });
  });
  return { issues, quantities };
}

/** Check a mapping against the plan (mappingPlanIssues) and resolve each entry's site and quantities. */
export function resolveMapping(mapping: Pick<DisMapping, 'sites' | 'channels' | 'entities'>, plan: EventPlan, file = 'mapping'): ResolvedEntity[] {
  const { issues, quantities } = mappingPlanIssues(mapping, plan);
  if (issues.length > 0) throw new DisMappingError('MAPPING_PLAN', `${file}: the mapping does not fit the plan`, issues.map((i) => `${i.path.join('.')}: ${i.message}`));
  return mapping.entities.map((e, i) => ({ ...e, siteLocation: mapping.sites[e.sensor], quantities: quantities[i] }));
}

export function parseDisMapping(text: string, file: string): DisMapping {
  let raw: unknown;
  try {
    raw = /\.ya?ml$/i.test(file) ? parseYaml(text) : JSON.parse(text);
  } catch (e) {
    throw new DisMappingError('MAPPING_SYNTAX', `${file}: ${e instanceof Error ? e.message : String(e)}`);
  }
  const r = disMappingSchema.safeParse(raw);
  if (!r.success) {
    const issues = r.error.issues.map((i) => `${i.path.join('.') || '(document)'}: ${i.message}`);
    throw new DisMappingError('MAPPING_INVALID', `${file}: the DIS mapping is not valid (${issues.length} problem${issues.length === 1 ? '' : 's'})`, issues);
  }
  return r.data;
}

export async function loadDisMapping(file: string): Promise<DisMapping> {
  let text: string;
  try {
    text = await readFile(file, 'utf8');
  } catch (e) {
    throw new DisMappingError('MAPPING_UNREADABLE', `cannot read the DIS mapping ${file}: ${e instanceof Error ? e.message : String(e)}`);
  }
  return parseDisMapping(text, file);
}
