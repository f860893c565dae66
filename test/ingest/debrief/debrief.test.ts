/**
 * The debrief package from a demo journal (test/support/demo-journal.ts: 18 live runs played
 * through the real service): the command writes the four files; results.json holds exactly the
 * service's export and matches its schema; the numbers of runs.csv and of the HTML are those of
 * results.json; the per-statistic combined values agree with Fisher's method computed from the
 * npm reference library jstat 1.9.6; the HTML loads nothing from outside and shows text from
 * outside as text; the same journal gives the same bytes apart from the generated-at line; a
 * package of an unfinished event says so on its first page.
 */
import { execFile, spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { unzipSync } from 'fflate';
import jStat from 'jstat';
import WebSocket from 'ws';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseCsv, runsColumns } from '../../../ingest/debrief/csv.js';
import { formatP } from '../../../ingest/debrief/html.js';
import { buildPackage, PACKAGE_FILES, type DebriefPackage } from '../../../ingest/debrief/package.js';
import { resultsSchema, type DebriefResults } from '../../../ingest/debrief/results-schema.js';
import { fromJournal } from '../../../ingest/debrief/source.js';
import type { AssessmentReport } from '../../../ingest/report.js';
import { FORMULA_NOTE, makeDemoJournal, MARKUP_AUTHOR, MARKUP_NOTE, type DemoJournal } from '../../support/demo-journal.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-debrief-'));
const cli = (...args: string[]) =>
  spawnSync(process.execPath, ['--import', 'tsx', join(process.cwd(), 'ingest', 'cli', 'main.ts'), ...args], { encoding: 'utf8', cwd: process.cwd() });
/** The command without blocking this process (needed when it talks to the server running here). */
const cliAsync = (...args: string[]) =>
  new Promise<{ status: number | null; stderr: string }>((res) => {
    execFile(process.execPath, ['--import', 'tsx', join(process.cwd(), 'ingest', 'cli', 'main.ts'), ...args], { cwd: process.cwd() }, (err, _out, stderr) => res({ status: err ? (typeof err.code === 'number' ? err.code : 1) : 0, stderr }));
  });
const read = (d: string): DebriefPackage => Object.fromEntries(PACKAGE_FILES.map((n) => [n, readFileSync(join(d, n), 'utf8')])) as unknown as DebriefPackage;
/** Everything but the generated-at value (one line in the report, one in results.json). */
const withoutGenerated = (pkg: DebriefPackage) => ({
  ...pkg,
  'report.html': pkg['report.html'].replace(/<p class="generated">Generated [^<]*<\/p>/, ''),
  'results.json': pkg['results.json'].replace(/\n {2}"generatedAt": "[^"]*",\n/, '\n'),
});

let demo: DemoJournal;
let exported: AssessmentReport;
let fromCli: DebriefPackage;
let results: DebriefResults;

beforeAll(async () => {
  demo = await makeDemoJournal(dir);
  exported = (await (await fetch(`${demo.server.url}/api/export`)).json()) as AssessmentReport;
  const r = cli('report', '--journal', demo.journal, '--out', join(dir, 'from-journal'));
  expect(r.stderr).not.toMatch(/internal failure/);
  expect(r.status).toBe(0);
  fromCli = read(join(dir, 'from-journal'));
  results = resultsSchema.parse(JSON.parse(fromCli['results.json']));
}, 240_000);

afterAll(async () => {
  await demo?.server.close();
  rmSync(dir, { recursive: true, force: true });
});

describe('plumbline report --journal', () => {
  it('writes the four files; results.json matches its schema and holds the service export unchanged', () => {
    expect(results.format).toBe('plumbline.debrief');
    expect(results.source).toEqual({ kind: 'journal', name: 'journal.sqlite' });
    expect(results.assessment).toEqual(exported);
    expect(results.event).toMatchObject({ complete: true, runsCompleted: 18, runsInFlight: [], vignettesWithoutRuns: [] });
    expect(results.advice.map((a) => a.vignette)).toEqual(demo.plan.vignettes.map((v) => v.id));
    expect(results.evidence?.afterEachRun).toHaveLength(18);
    expect(results.evidence?.current).toBe(results.evidence?.afterEachRun[17]);
    const schema = JSON.parse(cli('schema', 'results').stdout) as { properties: Record<string, unknown> };
    expect(Object.keys(schema.properties)).toEqual(expect.arrayContaining(['generatedAt', 'event', 'headline', 'evidence', 'advice', 'assessment']));
  });

  it('combines each statistic by Fisher’s method as jstat 1.9.6 computes it', () => {
    // Fisher (1932, §21.1): X = −2 Σ ln p ~ χ²(2k); reference survival function from jstat.
    for (const s of ['l2', 'score', 'residual'] as const) {
      const p = exported.runs.map((r) => r.statistics?.[s].pValue as number);
      const x = -2 * p.reduce((a, v) => a + Math.log(v), 0);
      const c = results.headline.perStatistic[s];
      expect(c?.count).toBe(18);
      expect(c?.statistic).toBeCloseTo(x, 10);
      expect(Math.abs((c?.pValue as number) - (1 - jStat.chisquare.cdf(x, 2 * p.length)))).toBeLessThan(1e-9);
    }
    expect(results.headline.overall?.pValue).toBe(exported.combined?.pValue);
    expect(results.headline.verdict).toBe((exported.combined?.pValue as number) <= 0.05 ? 'distinguishable' : 'not distinguishable');
  });

  it('runs.csv: one row per run whose numbers equal results.json', () => {
    const rows = parseCsv(fromCli['runs.csv']);
    const head = rows[0];
    expect(head).toEqual(runsColumns(exported.plan.channels));
    expect(rows).toHaveLength(1 + exported.runs.length);
    const col = (name: string) => head.indexOf(name);
    exported.runs.forEach((r, i) => {
      const row = rows[i + 1];
      expect([row[col('vignette')], row[col('run')]]).toEqual([r.vignette, r.track]);
      for (const s of ['l2', 'score', 'residual'] as const) {
        expect(Number(row[col(s)])).toBe(r.statistics?.[s].value);
        expect(Number(row[col(`p_${s}`)])).toBe(r.statistics?.[s].pValue);
      }
      expect(Number(row[col('p_overall')])).toBe(r.overall?.pValue);
      expect(row[col('flags')]).toBe(r.flags.join(';'));
      for (const d of r.practical ?? []) {
        expect(Number(row[col(`${d.channel}_max_deviation_${d.unit}`)])).toBe(d.maxDeviation);
        expect(Number(row[col(`${d.channel}_time_outside_band_s`)])).toBe(d.timeOutside);
        expect(row[col(`${d.channel}_within_tolerance`)]).toBe(String(d.withinTolerance));
      }
      expect(row[col('diagnosis')]).toBe(r.diagnosis?.kind ?? '');
    });
    expect(rows.find((r) => r[col('vignette')] === 'S1-L2' && r[col('run')] === 'live-1')?.[col('flags')]).toContain('dropout');
  });

  it('notes.csv: time, run, author and text, quoted per RFC 4180, formulas neutralised', () => {
    const rows = parseCsv(fromCli['notes.csv']);
    expect(rows[0]).toEqual(['time_utc', 'vignette', 'run', 'track_time_s', 'author', 'text']);
    expect(rows.slice(1).map((r) => r[5])).toEqual([MARKUP_NOTE, `'${FORMULA_NOTE}`, 'weather briefing: wind 12 kn from the west']);
    expect(rows[1].slice(1, 5)).toEqual(['S1-L2', 'live-1', '120', MARKUP_AUTHOR]);
    const logged = exported.log?.find((e) => e.text === MARKUP_NOTE);
    expect(rows[1][0]).toBe(new Date(logged?.at as number).toISOString());
  });

  it('the HTML shows the numbers of results.json, one section per run, the cautions first', () => {
    const html = fromCli['report.html'];
    const sections = html.split('<section class="run"').slice(1);
    expect(sections).toHaveLength(exported.runs.length);
    exported.runs.forEach((r, i) => {
      const s = sections[i];
      expect(s).toContain(`Run ${r.vignette} / ${r.track}`);
      for (const k of ['l2', 'score', 'residual'] as const) expect(s).toContain(`<td>${formatP(r.statistics?.[k].pValue)}</td>`);
      expect(s).toContain(`<strong>${formatP(r.overall?.pValue)}</strong>`);
      // One envelope chart per channel, histograms of the three statistics, the score chart.
      expect(s.match(/<svg /g)?.length).toBe(exported.plan.channels.length + 3 + 1);
    });
    const summary = html.slice(0, html.indexOf('<section class="run"'));
    expect(summary).toContain(`combined p = ${formatP(exported.combined?.pValue)} over 18 runs (the smallest per-statistic value below, calibrated; α = 0.05)`);
    // The three per-statistic values are the document's own (engine/combine-statistics.ts).
    for (const s of ['l2', 'score', 'residual'] as const) expect(summary).toContain(`<strong>${formatP(exported.combined?.byStatistic[s].pValue)}</strong>`);
    expect(summary).toContain(`Anytime-valid evidence:</strong> ${results.evidence?.current.toFixed(2)} against the threshold 20`);
    // Plan settings in words, not JSON.
    expect(summary).toContain('as many principal components as explain 95 % of the simulated runs&#39; variance');
    expect(summary).not.toContain('varianceFraction');
    expect(summary.indexOf('Statistical agreement is evidence, not accreditation.')).toBeLessThan(summary.indexOf('Event verdict'));
    for (const c of exported.cautions) expect(summary).toContain(c.replace(/'/g, '&#39;'));
    // Short advice on the first page; the long messages only in the methods section.
    for (const a of results.advice) {
      expect(summary).toContain(a.short);
      expect(summary).not.toContain(a.full.replace(/'/g, '&#39;'));
    }
  });

  it('the HTML loads nothing from outside: no script, link, image, frame, font or URL', () => {
    const html = fromCli['report.html'];
    const stripped = html.replace(/ xmlns(:xlink)?="http:\/\/www\.w3\.org\/[^"]*"/g, '');
    expect(stripped.match(/https?:\/\/.{0,40}/)).toBeNull();
    expect(html.match(/<script|<link|<img|<iframe|<object|<embed|@import|@font-face/i)).toBeNull();
    // SVG clip paths refer to ids in the same chart (url(#…)); nothing else is referenced.
    expect(html.match(/url\((?!#).{0,40}/)).toBeNull();
    expect(html.match(/\b(src|href|xlink:href)=.{0,40}/)).toBeNull();
  });

  it('shows producer- and analyst-supplied text as text', () => {
    const html = fromCli['report.html'];
    expect(html).toContain('radar &lt;b&gt;dropout&lt;/b&gt; &lt;script&gt;window.__x=1&lt;/script&gt; &quot;quoted&quot;');
    expect(html).toContain('analyst &lt;i&gt;A&lt;/i&gt;');
    expect(html).not.toContain('<b>dropout</b>');
    expect(html).not.toContain('<i>A</i>');
  });

  it('the same journal gives the same bytes apart from the generated-at line, in another process too', async () => {
    const again = buildPackage(await fromJournal(demo.journal), { generatedAt: new Date(Date.UTC(2030, 0, 1)) });
    expect(again['report.html']).toContain('Generated 2030-01-01T00:00:00.000Z');
    expect(withoutGenerated(again)).toEqual(withoutGenerated(fromCli));
    for (const n of PACKAGE_FILES) expect(withoutGenerated(again)[n] === withoutGenerated(fromCli)[n]).toBe(true);
    // Exactly one line differs in each of the two files that carry the time.
    for (const n of ['report.html', 'results.json'] as const) {
      const a = again[n].split('\n');
      const b = fromCli[n].split('\n');
      expect(a.length).toBe(b.length);
      expect(a.filter((line, i) => line !== b[i])).toHaveLength(1);
    }
  }, 120_000);
});

describe('plumbline report --url and --in', () => {
  it('from the running service: the same numbers', async () => {
    const r = await cliAsync('report', '--url', demo.server.url, '--out', join(dir, 'from-url'));
    expect(r.stderr).not.toMatch(/plumbline:/);
    expect(r.status).toBe(0);
    const pkg = read(join(dir, 'from-url'));
    expect(JSON.parse(pkg['results.json']).assessment).toEqual(exported);
    expect(pkg['runs.csv']).toBe(fromCli['runs.csv']);
    expect(pkg['notes.csv']).toBe(fromCli['notes.csv']);
  }, 60_000);

  it('from an assessment document: the numbers without charts, and it says why', () => {
    const r1 = cli('assess', '--plan', demo.files.plan, '--baseline', demo.files.baseline, '--live', demo.files.live, '--out', join(dir, 'doc.json'), '--quiet');
    expect(r1.status).toBe(0);
    const r = cli('report', '--in', join(dir, 'doc.json'), '--out', join(dir, 'from-doc'));
    expect(r.status).toBe(0);
    const pkg = read(join(dir, 'from-doc'));
    expect(pkg['report.html']).toContain('No charts: the report was made from an assessment document');
    expect(parseCsv(pkg['runs.csv'])).toHaveLength(19);
  }, 60_000);

  it('usage: exactly one source; a file that is not a journal or a document is refused with exit 2', () => {
    expect(cli('report', '--out', join(dir, 'x')).stderr).toMatch(/give --journal FILE, --url/);
    expect(cli('report', '--in', demo.files.plan, '--journal', demo.journal).status).toBe(2);
    const notJournal = cli('report', '--journal', demo.files.plan, '--out', join(dir, 'y'));
    expect(notJournal.status).toBe(2);
    expect(notJournal.stderr).toMatch(/is not a plumbline journal/);
    const notDoc = cli('report', '--in', demo.files.plan, '--out', join(dir, 'z'));
    expect(notDoc.status).toBe(2);
    expect(notDoc.stderr).toMatch(/not an assessment document/);
  }, 60_000);
});

describe('the dashboard download of an unfinished event', () => {
  it('GET /api/debrief.zip while a run is in flight: the first page says the event is unfinished', async () => {
    // A third run of S1-L1 opens and sends its first 40 points, and stays open.
    const track = demo.live.find((t) => t.vignette === 'S1-L1' && t.track === 'live-1');
    if (!track) throw new Error('demo has no S1-L1/live-1');
    const ws = new WebSocket(`${demo.server.url.replace(/^http/, 'ws')}/feed`);
    await new Promise((res, rej) => ws.once('open', res).once('error', rej));
    const replies: unknown[] = [];
    ws.on('message', (m) => replies.push(JSON.parse(m.toString())));
    const ids = { vignette: 'S1-L1', track: 'live-3' };
    ws.send(JSON.stringify({ v: 1, type: 'open', id: 'o', ...ids, source: 'live', channels: ['range', 'bearing'] }));
    const points = Array.from({ length: 40 }, (_, i) => ({ seq: i + 1, t: track.t[i], values: [track.values[0][i], track.values[1][i]] }));
    ws.send(JSON.stringify({ v: 1, type: 'points', id: 'p', ...ids, points }));
    await expect.poll(() => replies.some((r) => (r as { type: string }).type === 'ack')).toBe(true);
    ws.close();
    const res = await fetch(`${demo.server.url}/api/debrief.zip`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('application/zip');
    const files = unzipSync(new Uint8Array(await res.arrayBuffer()));
    const html = new TextDecoder().decode(files['debrief/report.html']);
    const first = html.slice(0, html.indexOf('<section class="run"'));
    expect(first).toMatch(/Unfinished event: this report covers the event so far\. 1 run is still in flight and not included \(S1-L1\/live-3 at \d+ s\)/);
    const res2 = resultsSchema.parse(JSON.parse(new TextDecoder().decode(files['debrief/results.json'])));
    expect(res2.event.complete).toBe(false);
    expect(res2.event.runsInFlight.map((r) => r.track)).toEqual(['live-3']);
    expect(res2.assessment.runs).toHaveLength(18);
  }, 60_000);
});
