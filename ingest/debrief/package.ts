/**
 * The debrief package: report.html (self-contained), results.json (`plumbline schema results`),
 * runs.csv and notes.csv, made from a `DebriefInput` (./source.ts). Deterministic: the same input
 * gives the same bytes apart from the one generated-at value (the `generatedAt` line of
 * results.json and the "Generated …" line of the report). `zipPackage` puts the four files in one
 * .zip (fflate, stored with a fixed timestamp) for the dashboard's download.
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { zipSync } from 'fflate';
import type { AdviceView } from '../service/compute.js';
import { notesCsv, runsCsv } from './csv.js';
import { eventHeadline, type EventHeadline } from './headline.js';
import { renderReport } from './html.js';
import { RESULTS_FORMAT, RESULTS_VERSION, type DebriefResults } from './results-schema.js';
import type { DebriefInput } from './source.js';

export const PACKAGE_FILES = ['report.html', 'results.json', 'runs.csv', 'notes.csv'] as const;
export type PackageFile = (typeof PACKAGE_FILES)[number];
export type DebriefPackage = Readonly<Record<PackageFile, string>>;

function pct(p: number): string {
  if (p < 0.01) return 'under 1 %';
  if (p > 0.99) return 'over 99 %';
  return `about ${Math.round(100 * p)} %`;
}

/** The short advice line of a vignette (the full message goes to the methods section). */
export function shortAdvice(a: Pick<AdviceView, 'established' | 'futile' | 'additionalRuns' | 'probability'>): string {
  if (a.established) return 'Discrepancy established; more runs will not change this.';
  if (a.futile) return 'More runs are unlikely to change the conclusion (not proof of agreement).';
  if (a.additionalRuns !== null) return `${a.additionalRuns} more run${a.additionalRuns === 1 ? '' : 's'} would decide it with probability ${pct(a.probability)}, if the pattern holds.`;
  return 'Undecided: a decision is not in sight, and it is too early to call more runs futile.';
}

/** Short advice from the full message alone (a document carries only the message). */
function shortFromMessage(message: string): string {
  if (/is established/.test(message)) return 'Discrepancy established; more runs will not change this.';
  if (/unlikely to change the conclusion/.test(message)) return 'More runs are unlikely to change the conclusion (not proof of agreement).';
  const m = /(\d+) more (?:run|runs|round|rounds) would reach it with probability about (\d+ %)/.exec(message);
  if (m) return `${m[1]} more run${m[1] === '1' ? '' : 's'} would decide it with probability about ${m[2]}, if the pattern holds.`;
  if (/no runs judged yet/.test(message)) return 'No run judged yet.';
  return 'Undecided: a decision is not in sight, and it is too early to call more runs futile.';
}

function eventStatus(input: DebriefInput): DebriefResults['event'] {
  const report = input.report;
  const inFlight = (input.state?.runs ?? []).filter((r) => r.status === 'in-flight').map((r) => ({ vignette: r.vignette, track: r.track, lastT: r.lastT }));
  const without = report.vignettes.filter((v) => v.runs === 0).map((v) => v.id);
  const completed = report.runs.filter((r) => r.status === 'assessed').length;
  const complete = inFlight.length === 0 && without.length === 0;
  const parts: string[] = [];
  if (complete) parts.push(`Complete: ${completed} live run${completed === 1 ? '' : 's'} judged; every vignette of the plan has at least one judged run and no run is in flight.`);
  else {
    parts.push('Unfinished event: this report covers the event so far.');
    if (inFlight.length) parts.push(`${inFlight.length} run${inFlight.length === 1 ? ' is' : 's are'} still in flight and not included (${inFlight.map((r) => `${r.vignette}/${r.track} at ${r.lastT.toFixed(0)} s`).join(', ')}).`);
    if (without.length) parts.push(`${without.length} vignette${without.length === 1 ? ' has' : 's have'} no judged run yet (${without.join(', ')}).`);
  }
  return { complete, runsCompleted: completed, runsInFlight: inFlight, vignettesWithoutRuns: without, status: parts.join(' ') };
}

/** results.json's content (without the report). */
export function buildResults(input: DebriefInput, generatedAt: string, headline: EventHeadline = eventHeadline(input.report)): DebriefResults {
  const report = input.report;
  const ev = input.state?.evidence;
  const seq = report.sequential;
  const evidence = ev
    ? { threshold: ev.threshold, current: ev.event.current, established: ev.event.established, crossedAt: ev.event.crossedAt, afterEachRun: [...ev.event.martingale] }
    : seq
      ? { threshold: seq.threshold, current: seq.evidence, established: seq.established, crossedAt: seq.crossedAt, afterEachRun: [] }
      : undefined;
  const advice = report.vignettes.flatMap((v) => {
    const stream = ev?.streams.find((s) => s.vignette === v.id && s.runs > 0);
    if (stream) return [{ vignette: v.id, short: shortAdvice(stream.advice), full: stream.advice.message }];
    const doc = seq?.vignettes.find((s) => s.id === v.id);
    return doc ? [{ vignette: v.id, short: shortFromMessage(doc.advice), full: doc.advice }] : [];
  });
  return {
    format: RESULTS_FORMAT,
    version: RESULTS_VERSION,
    generatedAt,
    source: { kind: input.source.kind, name: input.source.name },
    event: eventStatus(input),
    headline: {
      alpha: headline.alpha,
      method: headline.method,
      runs: headline.runs,
      verdict: headline.verdict,
      overall: headline.overall,
      perStatistic: headline.perStatistic,
      basis: headline.basis,
    },
    evidence,
    advice,
    assessment: report,
  };
}

/** All four files as text. */
export function buildPackage(input: DebriefInput, options: { generatedAt?: Date; title?: string } = {}): DebriefPackage {
  const generatedAt = (options.generatedAt ?? new Date()).toISOString();
  const headline = eventHeadline(input.report);
  const results = buildResults(input, generatedAt, headline);
  return {
    'report.html': renderReport(input, results, headline, options.title),
    'results.json': `${JSON.stringify(results, null, 2)}\n`,
    'runs.csv': runsCsv(input.report),
    'notes.csv': notesCsv(input.report),
  };
}

export function writePackage(dir: string, pkg: DebriefPackage): string[] {
  mkdirSync(dir, { recursive: true });
  return PACKAGE_FILES.map((name) => {
    const path = join(dir, name);
    writeFileSync(path, pkg[name]);
    return path;
  });
}

/** The package as one .zip (files under `folder/`), with a fixed timestamp so it too is reproducible. */
export function zipPackage(pkg: DebriefPackage, folder = 'debrief'): Uint8Array {
  const enc = new TextEncoder();
  const mtime = new Date(Date.UTC(2000, 0, 1));
  return zipSync(Object.fromEntries(PACKAGE_FILES.map((n) => [`${folder}/${n}`, [enc.encode(pkg[n]), { mtime }]])), { level: 6 });
}
