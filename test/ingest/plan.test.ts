/**
 * Tests of ingest/plan.ts: defaults, YAML, the mapping to engine shapes, and one invalid-plan case per
 * rule (each must give PLAN_INVALID and name the path of the offending field).
 */
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import { DEFAULT_ANALYSIS } from '../../engine/types.js';
import { InputError } from '../../ingest/errors.js';
import { loadPlan, parsePlan, planJsonSchema, type EventPlan } from '../../ingest/plan.js';

/** A minimal valid plan document. */
function minimal(): Record<string, unknown> {
  return {
    name: 'Harbour approach trials',
    channels: [
      { name: 'range', unit: 'm', tolerance: 25, maxRate: 30 },
      { name: 'bearing', unit: 'deg', period: 360 },
    ],
    vignettes: [{ id: 'S3-L2', horizon: 360, label: 'sea state 3, lane 2', condition: { seaState: 3, lane: 'L2' } }],
  };
}

/** Run a function that must throw an InputError, and return that error. */
function inputError(run: () => unknown): InputError {
  try {
    run();
  } catch (e) {
    if (e instanceof InputError) return e;
    throw e;
  }
  throw new Error('expected an InputError, but nothing was thrown');
}

describe('parsePlan: valid plans', () => {
  test('a minimal plan gets the default analysis settings and keeps every given field', () => {
    const plan = parsePlan(JSON.stringify(minimal()), 'plan.json');
    const expected: EventPlan = {
      name: 'Harbour approach trials',
      channels: [
        { name: 'range', unit: 'm', tolerance: 25, maxRate: 30 },
        { name: 'bearing', unit: 'deg', period: 360 },
      ],
      vignettes: [{ id: 'S3-L2', horizon: 360, label: 'sea state 3, lane 2', condition: { seaState: 3, lane: 'L2' } }],
      analysis: DEFAULT_ANALYSIS,
    };
    expect(plan).toEqual(expected);
    expect(plan.analysis.components).toEqual({ kind: 'variance', fraction: 0.95 });
    expect('description' in plan).toBe(false);
  });

  test('a partial analysis block keeps the other defaults', () => {
    const plan = parsePlan(JSON.stringify({ ...minimal(), analysis: { alpha: 0.01 } }), 'plan.json');
    expect(plan.analysis).toEqual({ ...DEFAULT_ANALYSIS, alpha: 0.01 });
  });

  test('a full analysis block is mapped to the engine shapes', () => {
    const doc = {
      ...minimal(),
      description: 'two lanes',
      analysis: { alpha: 0.5, components: { fixed: 4 }, gridSize: 16, segments: 400, combination: 'cauchy', gapFactor: 1.5, seed: 42, registration: { span: 0.35 } },
    };
    const plan = parsePlan(JSON.stringify(doc), 'plan.json');
    expect(plan.description).toBe('two lanes');
    expect(plan.analysis).toEqual({
      alpha: 0.5,
      components: { kind: 'fixed', count: 4 },
      gridSize: 16,
      segments: 400,
      combination: 'cauchy',
      gapFactor: 1.5,
      seed: 42,
      registration: { span: 0.35 },
    });
    // The registration span defaults to 0.2 of the horizon, also inside an empty block.
    expect(parsePlan(JSON.stringify({ ...minimal(), analysis: { registration: {} } }), 'p.json').analysis.registration).toEqual({ span: 0.2 });
    const frac = parsePlan(JSON.stringify({ ...minimal(), analysis: { components: { varianceFraction: 0.8 } } }), 'p.json');
    expect(frac.analysis.components).toEqual({ kind: 'variance', fraction: 0.8 });
  });

  test('a YAML plan (.yaml and .yml) parses to the same plan as its JSON twin', () => {
    const yaml = [
      'name: Harbour approach trials',
      'channels:',
      '  - { name: range, unit: m, tolerance: 25, maxRate: 30 }',
      '  - name: bearing',
      '    unit: deg',
      '    period: 360',
      'vignettes:',
      '  - id: S3-L2',
      '    horizon: 360',
      '    label: sea state 3, lane 2',
      '    condition: { seaState: 3, lane: L2 }',
      'analysis:',
      '  components: { fixed: 3 }',
      '  combination: stouffer',
    ].join('\n');
    const json = parsePlan(
      JSON.stringify({ ...minimal(), analysis: { components: { fixed: 3 }, combination: 'stouffer' } }),
      'plan.json',
    );
    expect(parsePlan(yaml, 'plan.yaml')).toEqual(json);
    expect(parsePlan(yaml, 'PLAN.YML')).toEqual(json);
    // The same text is not JSON: the extension decides the parser.
    expect(inputError(() => parsePlan(yaml, 'plan.json')).code).toBe('PLAN_SYNTAX');
  });

  test('a UTF-8 byte order mark is tolerated', () => {
    expect(parsePlan(`\uFEFF${JSON.stringify(minimal())}`, 'plan.json').name).toBe('Harbour approach trials');
  });
});

/** [what, the path that must be named, a change to the minimal document]. */
const invalid: [string, string, (d: Record<string, unknown>) => void][] = [
  ['missing name', 'name', (d) => delete d.name],
  ['empty name', 'name', (d) => (d.name = '')],
  ['unknown top-level key', '(root)', (d) => (d.owner = 'x')],
  ['no channels', 'channels', (d) => (d.channels = [])],
  ['channels not an array', 'channels', (d) => (d.channels = { name: 'range' })],
  ['channel name not an identifier', 'channels[0].name', (d) => (d.channels = [{ name: '1range', unit: 'm' }])],
  ['channel name with a space', 'channels[0].name', (d) => (d.channels = [{ name: 'slant range', unit: 'm' }])],
  ['channel named t', 'channels[0].name', (d) => (d.channels = [{ name: 't', unit: 's' }])],
  ['channel named vignette', 'channels[0].name', (d) => (d.channels = [{ name: 'vignette', unit: '' }])],
  ['channel named track', 'channels[0].name', (d) => (d.channels = [{ name: 'track', unit: '' }])],
  ['duplicate channel names', 'channels[2].name', (d) => (d.channels = [{ name: 'range', unit: 'm' }, { name: 'x', unit: 'm' }, { name: 'range', unit: 'km' }])],
  ['channel without unit', 'channels[0].unit', (d) => (d.channels = [{ name: 'range' }])],
  ['unknown channel key', 'channels[0]', (d) => (d.channels = [{ name: 'range', unit: 'm', scale: 2 }])],
  ['period zero', 'channels[0].period', (d) => (d.channels = [{ name: 'b', unit: 'deg', period: 0 }])],
  ['negative tolerance', 'channels[0].tolerance', (d) => (d.channels = [{ name: 'b', unit: 'deg', tolerance: -1 }])],
  ['maxRate as a string', 'channels[0].maxRate', (d) => (d.channels = [{ name: 'b', unit: 'deg', maxRate: '30' }])],
  ['no vignettes', 'vignettes', (d) => (d.vignettes = [])],
  ['horizon zero', 'vignettes[0].horizon', (d) => (d.vignettes = [{ id: 'A', horizon: 0 }])],
  ['horizon negative', 'vignettes[0].horizon', (d) => (d.vignettes = [{ id: 'A', horizon: -5 }])],
  ['horizon missing', 'vignettes[0].horizon', (d) => (d.vignettes = [{ id: 'A' }])],
  ['duplicate vignette ids', 'vignettes[1].id', (d) => (d.vignettes = [{ id: 'A', horizon: 1 }, { id: 'A', horizon: 2 }])],
  ['vignette id with a comma', 'vignettes[0].id', (d) => (d.vignettes = [{ id: 'A,B', horizon: 1 }])],
  ['vignette id with a quote', 'vignettes[0].id', (d) => (d.vignettes = [{ id: 'A"', horizon: 1 }])],
  ['vignette id with spaces around', 'vignettes[0].id', (d) => (d.vignettes = [{ id: ' A', horizon: 1 }])],
  ['empty vignette id', 'vignettes[0].id', (d) => (d.vignettes = [{ id: '', horizon: 1 }])],
  ['vignette id too long', 'vignettes[0].id', (d) => (d.vignettes = [{ id: 'x'.repeat(129), horizon: 1 }])],
  ['condition value boolean', 'vignettes[0].condition.night', (d) => (d.vignettes = [{ id: 'A', horizon: 1, condition: { night: true } }])],
  ['unknown vignette key', 'vignettes[0]', (d) => (d.vignettes = [{ id: 'A', horizon: 1, lane: 2 }])],
  ['alpha zero', 'analysis.alpha', (d) => (d.analysis = { alpha: 0 })],
  ['alpha above 0.5', 'analysis.alpha', (d) => (d.analysis = { alpha: 0.6 })],
  ['varianceFraction 1', 'analysis.components.varianceFraction', (d) => (d.analysis = { components: { varianceFraction: 1 } })],
  ['varianceFraction 0', 'analysis.components.varianceFraction', (d) => (d.analysis = { components: { varianceFraction: 0 } })],
  ['fixed 0', 'analysis.components.fixed', (d) => (d.analysis = { components: { fixed: 0 } })],
  ['fixed not an integer', 'analysis.components', (d) => (d.analysis = { components: { fixed: 2.5 } })],
  ['both component rules', 'analysis.components', (d) => (d.analysis = { components: { fixed: 2, varianceFraction: 0.9 } })],
  ['empty component rule', 'analysis.components', (d) => (d.analysis = { components: {} })],
  ['gridSize 15', 'analysis.gridSize', (d) => (d.analysis = { gridSize: 15 })],
  ['gridSize 2049', 'analysis.gridSize', (d) => (d.analysis = { gridSize: 2049 })],
  ['gridSize not an integer', 'analysis.gridSize', (d) => (d.analysis = { gridSize: 100.5 })],
  ['segments 3', 'analysis.segments', (d) => (d.analysis = { segments: 3 })],
  ['segments 401', 'analysis.segments', (d) => (d.analysis = { segments: 401 })],
  ['unknown combination', 'analysis.combination', (d) => (d.analysis = { combination: 'bonferroni' })],
  ['gapFactor 1', 'analysis.gapFactor', (d) => (d.analysis = { gapFactor: 1 })],
  ['registration span 0', 'analysis.registration.span', (d) => (d.analysis = { registration: { span: 0 } })],
  ['registration span above 0.5', 'analysis.registration.span', (d) => (d.analysis = { registration: { span: 0.6 } })],
  ['registration span in seconds', 'analysis.registration.span', (d) => (d.analysis = { registration: { span: '30 s' } })],
  ['unknown registration key', 'analysis.registration', (d) => (d.analysis = { registration: { maxShift: 30 } })],
  ['unknown analysis key', 'analysis', (d) => (d.analysis = { alpah: 0.1 })],
  ['analysis not an object', 'analysis', (d) => (d.analysis = 0.05)],
];

describe('parsePlan: invalid plans', () => {
  test.each(invalid)('%s gives PLAN_INVALID naming %s', (_what, path, change) => {
    const doc = minimal();
    change(doc);
    const err = inputError(() => parsePlan(JSON.stringify(doc), 'plan.json'));
    expect(err.code).toBe('PLAN_INVALID');
    expect(err.file).toBe('plan.json');
    expect(err.issues.map((i) => i.slice(0, i.indexOf(': ')))).toContain(path);
    expect(err.message.startsWith(`plan.json: ${path}: `)).toBe(true);
  });

  test('the message of a single issue is `file: path: rule`', () => {
    const err = inputError(() => parsePlan(JSON.stringify({ ...minimal(), analysis: { alpha: 0.7 } }), 'plan.json'));
    expect(err.message).toBe('plan.json: analysis.alpha: must be in (0, 0.5]');
  });

  test('every issue is listed, not only the first', () => {
    const doc = { ...minimal(), name: 7, analysis: { alpha: 2, gridSize: 1, extra: true } };
    const err = inputError(() => parsePlan(JSON.stringify(doc), 'plan.json'));
    expect(err.code).toBe('PLAN_INVALID');
    const paths = err.issues.map((i) => i.slice(0, i.indexOf(': ')));
    expect(paths).toEqual(expect.arrayContaining(['name', 'analysis.alpha', 'analysis.gridSize', 'analysis']));
    expect(err.issues).toHaveLength(4);
    for (const issue of err.issues) expect(err.message).toContain(issue);
  });

  test('a document that is not an object is PLAN_INVALID at the root', () => {
    const err = inputError(() => parsePlan('[1, 2]', 'plan.json'));
    expect(err.code).toBe('PLAN_INVALID');
    expect(err.issues[0].startsWith('(root): ')).toBe(true);
  });

  test('YAML infinities and NaN are refused', () => {
    const yaml = 'name: x\nchannels: [{ name: r, unit: m }]\nvignettes: [{ id: A, horizon: .inf }]\nanalysis: { gapFactor: .nan }\n';
    const err = inputError(() => parsePlan(yaml, 'plan.yml'));
    expect(err.code).toBe('PLAN_INVALID');
    const paths = err.issues.map((i) => i.slice(0, i.indexOf(': ')));
    expect(paths).toEqual(['vignettes[0].horizon', 'analysis.gapFactor']);
  });

  test('malformed JSON and YAML are PLAN_SYNTAX (YAML with its line)', () => {
    const json = inputError(() => parsePlan('{"name": "x",\n "channels": [}', 'plan.json'));
    expect(json.code).toBe('PLAN_SYNTAX');
    expect(json.file).toBe('plan.json');
    const yaml = inputError(() => parsePlan('name: x\nchannels: [\n', 'plan.yaml'));
    expect(yaml.code).toBe('PLAN_SYNTAX');
    expect(yaml.line).toBe(3);
    expect(yaml.message.startsWith('plan.yaml:3: invalid YAML: ')).toBe(true);
    const dupKey = inputError(() => parsePlan('name: x\nname: y\n', 'plan.yaml'));
    expect(dupKey.code).toBe('PLAN_SYNTAX');
  });
});

describe('loadPlan', () => {
  let dir = '';
  beforeAll(async () => {
    dir = await mkdtemp(join(tmpdir(), 'plumbline-plan-'));
  });
  afterAll(async () => {
    await rm(dir, { recursive: true, force: true });
  });

  test('reads JSON and YAML files by extension', async () => {
    await writeFile(join(dir, 'plan.json'), JSON.stringify(minimal()));
    await writeFile(join(dir, 'plan.yaml'), 'name: Y\nchannels: [{ name: r, unit: m }]\nvignettes: [{ id: A, horizon: 5 }]\n');
    expect((await loadPlan(join(dir, 'plan.json'))).vignettes[0].id).toBe('S3-L2');
    const y = await loadPlan(join(dir, 'plan.yaml'));
    expect(y.name).toBe('Y');
    expect(y.channels).toEqual([{ name: 'r', unit: 'm' }]);
  });

  test('an invalid file names the path given', async () => {
    const path = join(dir, 'bad.json');
    await writeFile(path, JSON.stringify({ ...minimal(), analysis: { segments: 2 } }));
    await expect(loadPlan(path)).rejects.toMatchObject({ code: 'PLAN_INVALID', file: path });
  });

  test('a missing file is PLAN_UNREADABLE', async () => {
    const path = join(dir, 'missing.json');
    const err = await loadPlan(path).then(
      () => undefined,
      (e: unknown) => e,
    );
    expect(err).toBeInstanceOf(InputError);
    expect(err).toMatchObject({ code: 'PLAN_UNREADABLE', file: path });
  });
});

describe('planJsonSchema', () => {
  test('exports the input side: required fields, closed objects, defaults and ranges', () => {
    const schema = planJsonSchema();
    expect(schema.type).toBe('object');
    expect(schema.additionalProperties).toBe(false);
    expect(schema.required).toEqual(['name', 'channels', 'vignettes']);
    const props = schema.properties as Record<string, Record<string, unknown>>;
    const analysis = props.analysis.properties as Record<string, Record<string, unknown>>;
    expect(analysis.alpha).toMatchObject({ default: 0.05, exclusiveMinimum: 0, maximum: 0.5 });
    expect(analysis.gridSize).toMatchObject({ type: 'integer', minimum: 16, maximum: 2048, default: 128 });
    expect(analysis.combination.enum).toEqual(['fisher', 'stouffer', 'tippett', 'cauchy']);
    expect(analysis.components.anyOf).toHaveLength(2);
    const registration = analysis.registration.properties as Record<string, Record<string, unknown>>;
    expect(registration.span).toMatchObject({ default: 0.2, exclusiveMinimum: 0, maximum: 0.5 });
    expect(props.channels).toMatchObject({ minItems: 1 });
  });
});
