#!/usr/bin/env node
/**
 * The `plumbline` command. Subcommands:
 *   assess      judge recorded live runs against simulated ones, from files
 *   demo-files  write the invented demo event (plan, simulated and live runs) to a folder
 *   demo        the built-in demo: write the demo event and judge it
 *   schema      print the JSON Schema of the plan or of the assessment document
 *
 * Exit codes: 0 success; 2 bad input or usage; 3 internal failure.
 */
import { parseArgs, type ParseArgsConfig } from 'node:util';
import { join } from 'node:path';
import { z } from 'zod';
import { InputError } from '../errors.js';
import { planJsonSchema } from '../plan.js';
import { assessmentReportSchema } from '../report.js';
import { assessFiles, formatReport, writeReport } from './assess.js';
import { writeDemoFiles } from './demo-files.js';

export const EXIT_OK = 0;
export const EXIT_INPUT = 2;
export const EXIT_INTERNAL = 3;

class UsageError extends Error {
  readonly code = 'USAGE';
}

const USAGE = `usage: plumbline <command> [options]

commands:
  assess --plan FILE --baseline FILE --live FILE [--out FILE] [--skip-bad-rows] [--quiet]
      judge recorded live runs against the simulated runs of each vignette
  demo [--dir DIR] [--seed N] [--sims N]
      write the invented harbour-approach demo event and judge it
  demo-files [--dir DIR] [--seed N] [--sims N] [--live-runs N]
      only write the demo event's files (plan.json, baseline.csv, live.csv, truth.json)
  schema plan|assessment
      print the JSON Schema of an event plan or of the assessment document

exit codes: 0 success, 2 bad input or usage, 3 internal failure`;

function parse<T extends ParseArgsConfig['options']>(args: string[], options: T) {
  try {
    return parseArgs({ args, options, allowPositionals: true, strict: true });
  } catch (e) {
    throw new UsageError(e instanceof Error ? e.message : String(e));
  }
}

function required(value: string | boolean | undefined, name: string): string {
  if (typeof value !== 'string' || value === '') throw new UsageError(`missing --${name}`);
  return value;
}

function integer(value: string | boolean | undefined, name: string, fallback: number): number {
  if (value === undefined) return fallback;
  const n = Number(value);
  if (typeof value !== 'string' || !Number.isInteger(n) || n < 0) throw new UsageError(`--${name} must be a non-negative integer, got ${String(value)}`);
  return n;
}

async function run(argv: string[]): Promise<number> {
  const [command, ...rest] = argv;
  switch (command) {
    case 'assess': {
      const { values } = parse(rest, {
        plan: { type: 'string' },
        baseline: { type: 'string' },
        live: { type: 'string' },
        out: { type: 'string' },
        'skip-bad-rows': { type: 'boolean' },
        quiet: { type: 'boolean' },
      });
      const { plan, report } = await assessFiles({
        planPath: required(values.plan, 'plan'),
        baselinePath: required(values.baseline, 'baseline'),
        livePath: required(values.live, 'live'),
        skipBadRows: values['skip-bad-rows'] === true,
      });
      if (typeof values.out === 'string') await writeReport(values.out, report);
      if (values.quiet !== true) process.stdout.write(`${formatReport(plan, report)}\n`);
      if (typeof values.out === 'string') process.stderr.write(`wrote ${values.out}\n`);
      return EXIT_OK;
    }
    case 'demo-files':
    case 'demo': {
      const { values } = parse(rest, {
        dir: { type: 'string' },
        seed: { type: 'string' },
        sims: { type: 'string' },
        'live-runs': { type: 'string' },
      });
      const dir = typeof values.dir === 'string' ? values.dir : join('.plumbline', 'demo');
      const files = await writeDemoFiles(dir, {
        seed: integer(values.seed, 'seed', 20261201),
        simsPerVignette: integer(values.sims, 'sims', 200),
        liveRunsPerVignette: integer(values['live-runs'], 'live-runs', 1),
      });
      process.stderr.write(`wrote the demo event to ${files.dir}: plan.json, baseline.csv, live.csv, truth.json\n`);
      if (command === 'demo-files') return EXIT_OK;
      const { plan, report } = await assessFiles({ planPath: files.plan, baselinePath: files.baseline, livePath: files.live });
      const out = join(dir, 'assessment.json');
      await writeReport(out, report);
      process.stdout.write(`${formatReport(plan, report)}\n`);
      process.stderr.write(`wrote ${out}\n`);
      return EXIT_OK;
    }
    case 'schema': {
      const which = rest[0];
      if (which === 'plan') process.stdout.write(`${JSON.stringify(planJsonSchema(), null, 2)}\n`);
      else if (which === 'assessment') process.stdout.write(`${JSON.stringify(z.toJSONSchema(assessmentReportSchema, { io: 'output' }), null, 2)}\n`);
      else throw new UsageError(`schema: expected "plan" or "assessment", got ${which ?? 'nothing'}`);
      return EXIT_OK;
    }
    case undefined:
    case 'help':
    case '--help':
    case '-h':
      process.stdout.write(`${USAGE}\n`);
      return command === undefined ? EXIT_INPUT : EXIT_OK;
    default:
      throw new UsageError(`unknown command "${command}"`);
  }
}

export async function main(argv: string[]): Promise<number> {
  try {
    return await run(argv);
  } catch (e) {
    if (e instanceof UsageError) {
      process.stderr.write(`plumbline: ${e.message}\n\n${USAGE}\n`);
      return EXIT_INPUT;
    }
    if (e instanceof InputError) {
      process.stderr.write(`plumbline: ${e.message}\n`);
      for (const issue of e.issues) process.stderr.write(`  ${issue}\n`);
      return EXIT_INPUT;
    }
    process.stderr.write(`plumbline: internal failure: ${e instanceof Error ? (e.stack ?? e.message) : String(e)}\n`);
    return EXIT_INTERNAL;
  }
}

const invokedDirectly = process.argv[1] !== undefined && import.meta.url === new URL(`file://${process.argv[1]}`).href;
if (invokedDirectly || process.argv[1]?.endsWith('/plumbline')) {
  main(process.argv.slice(2)).then((code) => {
    process.exitCode = code;
  });
}
