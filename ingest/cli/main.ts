#!/usr/bin/env node
/**
 * The `plumbline` command. Subcommands:
 *   assess      judge recorded live runs against simulated ones, from files
 *   demo-files  write the invented demo event (plan, simulated and live runs) to a folder
 *   demo        the built-in demo: the invented event streamed through the live service
 *   schema      print the JSON Schema of the plan, the assessment document or the feed protocol
 *   serve       the live service: WebSocket feed, journal, running assessment, dashboard
 *   replay      send recorded tracks to a running service as a producer would
 *   report      write the debrief package (report.html, results.json, runs.csv, notes.csv)
 *   dis-bridge  receive DIS Entity State PDUs over UDP and feed them to a running service as runs
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
import { DemoError, runDemo } from './demo.js';
import { readFileSync, writeFileSync } from 'node:fs';
import { DebriefError } from '../debrief/source.js';
import { resultsJsonSchema } from '../debrief/results-schema.js';
import { JournalError } from '../service/journal.js';
import { protocolJsonSchema } from '../service/protocol.js';
import { replay, ReplayError } from '../service/replay.js';
import { DisMappingError } from '../dis/mapping.js';
import { disBridgeCommand, DisBridgeError, DisBridgeUsageError } from './dis-bridge.js';
import { ServeError, startServer } from '../service/server.js';
import { loadPlan, loadPlanWithSources } from '../plan.js';
import { serveDisConfig, startServeDis, stopServeDis } from './serve-dis.js';
import { attachMonitor, BROKER_USAGE, gatherCommand, publishCommand } from './broker.js';
import { BrokerError } from '../broker/streams.js';
import { readTracks } from '../tracks-reader.js';
import { terminalProgress } from './progress.js';

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
  demo [--speed X] [--seed N] [--port N] [--sims N] [--runs N] [--overlap N] [--dir DIR] [--exit]
      the built-in demo: generate the invented harbour-approach event, start the service and
      replay its live runs over the feed (default: 2 runs per vignette, 20× speed, 3 at a
      time); --exit stops when all runs are judged
  demo-files [--dir DIR] [--seed N] [--sims N] [--live-runs N]
      only write the demo event's files (plan.json, baseline.csv, live.csv, truth.json)
  schema plan|assessment|results|protocol
      print the JSON Schema of an event plan, the assessment document, the debrief's
      results.json or the feed protocol
  serve [--plan FILE] [--baseline FILE] [--journal FILE] [--host H] [--port N] [--token-file F]
        [--allow-origin URL]... [--durability normal|full] [--dis udp://HOST:PORT [--dis-map FILE]]
      the live service (default 127.0.0.1:7340, journal .plumbline/journal.sqlite); binding to
      another address needs a producer token (PLUMBLINE_TOKEN or --token-file); --dis (or the
      plan's sources.dis block) also receives DIS Entity State PDUs in the service (unicast,
      broadcast or a multicast group), the entity mapping from the plan or --dis-map
  replay --live FILE [--baseline FILE] [--plan FILE] [--url ws://HOST:PORT/feed] [--speed X]
         [--overlap N] [--token-file F]
      send recorded runs to a running service at their recorded pace times --speed
  report (--journal FILE [--baseline FILE] | --url http://HOST:PORT | --in FILE) [--out DIR]
      write the debrief package into DIR (default debrief/): report.html (self-contained,
      prints to PDF), results.json, runs.csv, notes.csv; from a journal (read, not changed),
      a running service or an assessment document
  dis-bridge --listen udp://HOST:PORT [--group MULTICAST_ADDR] --map FILE [--plan FILE]
             [--url ws://HOST:PORT/feed] [--silence S] [--token-file F]
      receive DIS Entity State PDUs (versions 6 and 7; unicast, broadcast or a multicast
      group) and send each mapped entity to a running service as a run, its position
      converted to the plan's channels; a run closes after S seconds without PDUs (default 10)
${BROKER_USAGE}

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
  if (rest.includes('--help') || rest.includes('-h')) {
    process.stdout.write(`${USAGE}\n`);
    return EXIT_OK;
  }
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
    case 'demo-files': {
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
      return EXIT_OK;
    }
    case 'demo':
      return demo(rest);
    case 'schema': {
      const which = rest[0];
      if (which === 'plan') process.stdout.write(`${JSON.stringify(planJsonSchema(), null, 2)}\n`);
      else if (which === 'assessment') process.stdout.write(`${JSON.stringify(z.toJSONSchema(assessmentReportSchema, { io: 'output' }), null, 2)}\n`);
      else if (which === 'results') process.stdout.write(`${JSON.stringify(resultsJsonSchema(), null, 2)}\n`);
      else if (which === 'protocol') process.stdout.write(`${JSON.stringify(protocolJsonSchema(), null, 2)}\n`);
      else throw new UsageError(`schema: expected "plan", "assessment", "results" or "protocol", got ${which ?? 'nothing'}`);
      return EXIT_OK;
    }
    case 'serve':
      return serve(rest);
    case 'report':
      return reportCommand(rest);
    case 'replay':
      return replayCommand(rest);
    case 'publish':
      return publishCommand(rest);
    case 'gather':
      return gatherCommand(rest, dashboardDir());
    case 'dis-bridge': {
      const { values } = parse(rest, {
        listen: { type: 'string' },
        group: { type: 'string' },
        url: { type: 'string' },
        plan: { type: 'string' },
        map: { type: 'string' },
        silence: { type: 'string' },
        'token-file': { type: 'string' },
      });
      const url = typeof values.url === 'string' ? values.url : `ws://127.0.0.1:${DEFAULT_PORT}/feed`;
      const planPath = typeof values.plan === 'string' ? values.plan : undefined;
      const plan = planPath ? await loadPlan(planPath) : await fetchPlan(url);
      return disBridgeCommand({
        listen: required(values.listen, 'listen'),
        group: typeof values.group === 'string' ? values.group : undefined,
        url,
        plan,
        mapPath: required(values.map, 'map'),
        silence: values.silence,
        token: token(values),
      });
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

export const DEFAULT_PORT = 7340;

function token(values: { 'token-file'?: string | boolean }): string | undefined {
  if (typeof values['token-file'] === 'string') {
    try {
      return readFileSync(values['token-file'], 'utf8').trim();
    } catch (e) {
      throw new UsageError(`cannot read the token file ${values['token-file']}: ${e instanceof Error ? e.message : String(e)}`);
    }
  }
  const env = process.env.PLUMBLINE_TOKEN;
  return env && env.length > 0 ? env : undefined;
}

function port(value: string | boolean | undefined, fallback: number): number {
  const n = integer(value, 'port', fallback);
  if (n > 65535) throw new UsageError(`--port must be at most 65535, got ${n}`);
  return n;
}

async function serve(args: string[]): Promise<number> {
  const { values } = parse(args, {
    plan: { type: 'string' },
    baseline: { type: 'string' },
    journal: { type: 'string' },
    host: { type: 'string' },
    port: { type: 'string' },
    'token-file': { type: 'string' },
    'allow-origin': { type: 'string', multiple: true },
    durability: { type: 'string' },
    dis: { type: 'string' },
    'dis-map': { type: 'string' },
    broker: { type: 'string' },
    shard: { type: 'string' },
    'shard-name': { type: 'string' },
    event: { type: 'string' },
  });
  const durability = values.durability;
  if (durability !== undefined && durability !== 'normal' && durability !== 'full') throw new UsageError('--durability must be "normal" or "full"');
  const planFile = typeof values.plan === 'string' ? await loadPlanWithSources(values.plan) : undefined;
  const dis = await serveDisConfig({ dis: typeof values.dis === 'string' ? values.dis : undefined, map: typeof values['dis-map'] === 'string' ? values['dis-map'] : undefined, sources: planFile?.sources ?? {} });
  const progress = terminalProgress();
  const server = await startServer({
    plan: planFile?.plan,
    baselinePath: typeof values.baseline === 'string' ? values.baseline : undefined,
    journalPath: typeof values.journal === 'string' ? values.journal : join('.plumbline', 'journal.sqlite'),
    host: typeof values.host === 'string' ? values.host : '127.0.0.1',
    port: port(values.port, DEFAULT_PORT),
    token: token(values),
    allowedOrigins: Array.isArray(values['allow-origin']) ? values['allow-origin'].filter((x): x is string => typeof x === 'string') : [],
    durability,
    staticDir: dashboardDir(),
    log: (line) => process.stderr.write(`${line}\n`),
    onProgress: (label, d, t) => progress.update(label, d, t),
  });
  progress.done();
  const say = (line: string) => process.stderr.write(`${line}\n`);
  let disSource;
  try {
    disSource = dis ? await startServeDis(server, planFile?.plan, dis, say) : undefined;
  } catch (e) {
    await server.close();
    throw e;
  }
  process.stderr.write(`plumbline is serving ${server.url}  (feed: ws://${server.url.slice(7)}/feed)\n`);
  const shard = await attachMonitor(server, values, (line) => process.stderr.write(`${line}\n`)).catch(async (e: unknown) => {
    if (disSource) await stopServeDis(disSource, say);
    await server.close();
    throw e;
  });
  await new Promise<void>((res) => {
    const stop = () => res();
    process.once('SIGINT', stop);
    process.once('SIGTERM', stop);
  });
  if (disSource) await stopServeDis(disSource, say);
  process.stderr.write('stopping: committing the journal\n');
  await shard?.close();
  await server.close();
  return EXIT_OK;
}

/** The built dashboard, next to the compiled service (dist/dashboard) when present. */
export function dashboardDir(): string {
  return new URL('../../dashboard/', import.meta.url).pathname;
}

async function demo(args: string[]): Promise<number> {
  const { values } = parse(args, {
    dir: { type: 'string' },
    seed: { type: 'string' },
    sims: { type: 'string' },
    runs: { type: 'string' },
    speed: { type: 'string' },
    overlap: { type: 'string' },
    port: { type: 'string' },
    exit: { type: 'boolean' },
  });
  const speed = values.speed === undefined ? 20 : Number(values.speed);
  if (!(speed >= 0)) throw new UsageError(`--speed must be a number >= 0 (0: as fast as possible), got ${String(values.speed)}`);
  const { server } = await runDemo({
    dir: typeof values.dir === 'string' ? values.dir : join('.plumbline', 'demo'),
    seed: integer(values.seed, 'seed', 20261201),
    sims: integer(values.sims, 'sims', 200),
    runs: Math.max(1, integer(values.runs, 'runs', 2)),
    speed,
    overlap: Math.max(1, integer(values.overlap, 'overlap', 3)),
    port: port(values.port, DEFAULT_PORT),
    staticDir: dashboardDir(),
    exitWhenDone: values.exit === true,
  });
  if (values.exit !== true) {
    await new Promise<void>((res) => {
      process.once('SIGINT', () => res());
      process.once('SIGTERM', () => res());
    });
  }
  await server.close();
  return EXIT_OK;
}

async function reportCommand(args: string[]): Promise<number> {
  const { values } = parse(args, { journal: { type: 'string' }, baseline: { type: 'string' }, url: { type: 'string' }, in: { type: 'string' }, out: { type: 'string' } });
  const str = (x: string | boolean | undefined) => (typeof x === 'string' ? x : undefined);
  const o = { journal: str(values.journal), url: str(values.url), in: str(values.in), baseline: str(values.baseline) };
  // Loaded when used: the charts library it brings is large, and the service and demo never need it.
  const { sourceProblem, writeDebrief } = await import('./debrief.js');
  const problem = sourceProblem(o);
  if (problem) throw new UsageError(problem);
  if (o.baseline !== undefined && o.journal === undefined) throw new UsageError('report: --baseline goes with --journal');
  const progress = terminalProgress();
  const out = str(values.out) ?? 'debrief';
  const written = await writeDebrief({ ...o, out, onProgress: (label, d, t) => progress.update(label, d, t) });
  progress.done();
  process.stderr.write(`wrote ${written.join(', ')}\n`);
  return EXIT_OK;
}

async function replayCommand(args: string[]): Promise<number> {
  const { values } = parse(args, {
    live: { type: 'string' },
    baseline: { type: 'string' },
    plan: { type: 'string' },
    url: { type: 'string' },
    speed: { type: 'string' },
    overlap: { type: 'string' },
    'token-file': { type: 'string' },
  });
  const url = typeof values.url === 'string' ? values.url : `ws://127.0.0.1:${DEFAULT_PORT}/feed`;
  const planPath = typeof values.plan === 'string' ? values.plan : undefined;
  const plan = planPath ? await loadPlan(planPath) : await fetchPlan(url);
  const live = (await readTracks(required(values.live, 'live'), plan)).tracks;
  const sims = typeof values.baseline === 'string' ? (await readTracks(values.baseline, plan)).tracks : undefined;
  const speed = values.speed === undefined ? 1 : Number(values.speed);
  if (!(speed >= 0)) throw new UsageError(`--speed must be a number >= 0, got ${String(values.speed)}`);
  const summary = await replay({
    url,
    token: token(values),
    plan,
    live,
    sims,
    speed,
    overlap: integer(values.overlap, 'overlap', 1),
    onEvent: (line) => process.stderr.write(`${line}\n`),
  });
  process.stderr.write(`replayed ${summary.points} points in ${summary.tracks} tracks (${summary.reconnects} reconnects, ${summary.errors} errors)\n`);
  return summary.errors > 0 ? EXIT_INPUT : EXIT_OK;
}

/** The plan of a running server, from its state endpoint (channel names and vignettes suffice). */
async function fetchPlan(feedUrl: string): Promise<import('../plan.js').EventPlan> {
  const http = feedUrl.replace(/^ws/, 'http').replace(/\/feed$/, '');
  const res = await fetch(`${http}/api/plan`).catch((e: unknown) => {
    throw new UsageError(`cannot reach ${http}: ${e instanceof Error ? e.message : String(e)}; give --plan`);
  });
  if (!res.ok) throw new UsageError(`${http}/api/plan answered ${res.status}; give --plan`);
  return (await res.json()) as import('../plan.js').EventPlan;
}

export async function main(argv: string[]): Promise<number> {
  try {
    return await run(argv);
  } catch (e) {
    if (e instanceof UsageError || e instanceof DisBridgeUsageError) {
      process.stderr.write(`plumbline: ${e.message}\n\n${USAGE}\n`);
      return EXIT_INPUT;
    }
    if (e instanceof ServeError || e instanceof JournalError || e instanceof ReplayError || e instanceof DemoError || e instanceof DebriefError || e instanceof DisBridgeError || e instanceof BrokerError) {
      process.stderr.write(`plumbline: ${e.message}\n`);
      return EXIT_INPUT;
    }
    if (e instanceof InputError || e instanceof DisMappingError) {
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
