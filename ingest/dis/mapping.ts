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
import { parse as parseYaml } from 'yaml';
import { z } from 'zod';
import type { EventPlan } from '../plan.js';
import type { Geodetic } from './geodesy.js';

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

export const disMappingSchema = z
  .strictObject({
    sites: z.record(z.string().min(1), siteSchema),
    channels: z.record(z.string(), z.enum(['range', 'bearing', 'elevation', 'east', 'north', 'up'])).optional(),
    entities: z.array(entitySchema).min(1),
  })
  .superRefine((m, ctx) => {
    const seen = new Set<string>();
    m.entities.forEach((e, i) => {
      if (!(e.sensor in m.sites)) ctx.addIssue({ code: 'custom', path: ['entities', i, 'sensor'], message: `unknown site ${JSON.stringify(e.sensor)}`, input: e.sensor });
      const k = `${e.exercise ?? '*'}:${e.site}:${e.application}:${e.entity}`;
      if (seen.has(k)) ctx.addIssue({ code: 'custom', path: ['entities', i], message: `entity ${e.site}:${e.application}:${e.entity} is mapped twice`, input: k });
      seen.add(k);
    });
  });

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

/**
 * Check a mapping against the plan: every vignette exists, and every plan channel maps to a
 * quantity that the entry's conversion gives.
 */
export function resolveMapping(mapping: DisMapping, plan: EventPlan, file = 'mapping'): ResolvedEntity[] {
  const issues: string[] = [];
  const vignettes = new Set(plan.vignettes.map((v) => v.id));
  const out = mapping.entities.map((e, i) => {
    if (!vignettes.has(e.vignette)) issues.push(`entities.${i}.vignette: ${JSON.stringify(e.vignette)} is not a vignette of the plan`);
    const offered: readonly string[] = QUANTITIES[e.conversion];
    const quantities = plan.channels.map((c) => {
      const q = mapping.channels?.[c.name] ?? c.name;
      if (!offered.includes(q)) issues.push(`entities.${i}: plan channel ${JSON.stringify(c.name)} needs quantity ${JSON.stringify(q)}, which conversion "${e.conversion}" does not give (${offered.join(', ')})`);
      return q as Quantity;
    });
    return { ...e, siteLocation: mapping.sites[e.sensor], quantities };
  });
  if (issues.length > 0) throw new DisMappingError('MAPPING_PLAN', `${file}: the mapping does not fit the plan`, issues);
  return out;
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
