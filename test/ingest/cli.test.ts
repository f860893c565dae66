/**
 * The `plumbline` command end to end, as a user runs it (a child process through tsx): exit codes,
 * messages that say what and where, and a JSON document that matches its schema and the engine.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync, appendFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { assessEvent } from '../../engine/event.js';
import { writeDemoFiles } from '../../ingest/cli/demo-files.js';
import { loadPlan } from '../../ingest/plan.js';
import { assessmentReportSchema } from '../../ingest/report.js';
import { readTracks } from '../../ingest/tracks-reader.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-cli-'));
const cli = (...args: string[]) =>
  spawnSync(process.execPath, ['--import', 'tsx', join(process.cwd(), 'ingest', 'cli', 'main.ts'), ...args], { encoding: 'utf8', cwd: process.cwd() });

let files: Awaited<ReturnType<typeof writeDemoFiles>>;
beforeAll(async () => {
  files = await writeDemoFiles(join(dir, 'demo'), { seed: 7, simsPerVignette: 40 });
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('plumbline assess', () => {
  it('exits 0, prints the per-run table and writes a document that matches its schema and the engine', async () => {
    const out = join(dir, 'result.json');
    const r = cli('assess', '--plan', files.plan, '--baseline', files.baseline, '--live', files.live, '--out', out);
    expect(r.stderr).not.toMatch(/internal failure/);
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/vignette\s+run\s+p\(L2\)/);
    expect(r.stdout).toMatch(/combined over 9 runs: p = /);
    expect(r.stdout).toMatch(/per statistic \(fisher\): L2 p = .*, score p = .*, residual p = /);
    expect(r.stdout).toMatch(/caution: Statistical agreement is evidence, not accreditation/);
    const doc = assessmentReportSchema.parse(JSON.parse(readFileSync(out, 'utf8')));
    expect(doc.runs).toHaveLength(9);
    // One engine: the same numbers in-process.
    const plan = await loadPlan(files.plan);
    const sims = (await readTracks(files.baseline, plan)).tracks;
    const live = (await readTracks(files.live, plan)).tracks;
    const event = assessEvent(plan.vignettes, plan.channels, plan.analysis, sims, live);
    expect(doc.combined?.pValue).toBe(event.combined?.pValue);
    event.runs.forEach((run, i) => expect(doc.runs[i].overall?.pValue).toBe(run.assessment?.result.pValues.overall));
    const dropout = doc.runs.find((x) => x.vignette === 'S1-L2');
    expect(dropout?.flags).toContain('dropout');
    expect(doc.vignettes.every((v) => v.model && v.model.sims === 40)).toBe(true);
  });

  it('a bad row: exit 2 and a message naming file, line, column and reason; --skip-bad-rows counts it', () => {
    const bad = join(dir, 'bad-live.csv');
    writeFileSync(bad, readFileSync(files.live, 'utf8'));
    appendFileSync(bad, 'S1-L1,live-1,300.25,12a.5,140\n');
    const lines = readFileSync(bad, 'utf8').trimEnd().split('\n').length;
    const r = cli('assess', '--plan', files.plan, '--baseline', files.baseline, '--live', bad);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain(`bad-live.csv:${lines}: column "range": not a number ("12a.5")`);
    const out = join(dir, 'skipped.json');
    const s = cli('assess', '--plan', files.plan, '--baseline', files.baseline, '--live', bad, '--skip-bad-rows', '--out', out, '--quiet');
    expect(s.status).toBe(0);
    expect(JSON.parse(readFileSync(out, 'utf8')).inputs.live.skipped).toBe(1);
  });

  it('usage errors and unreadable files exit 2 with the reason', () => {
    const a = cli('assess', '--plan', files.plan);
    expect(a.status).toBe(2);
    expect(a.stderr).toMatch(/missing --baseline/);
    const b = cli('assess', '--plan', join(dir, 'nope.json'), '--baseline', files.baseline, '--live', files.live);
    expect(b.status).toBe(2);
    expect(b.stderr).toMatch(/nope\.json/);
    const c = cli('frobnicate');
    expect(c.status).toBe(2);
    expect(c.stderr).toMatch(/unknown command "frobnicate"/);
  });

  it('prints the JSON Schemas of the plan and of the assessment document', () => {
    const plan = JSON.parse(cli('schema', 'plan').stdout);
    expect(plan.properties.channels).toBeDefined();
    const doc = JSON.parse(cli('schema', 'assessment').stdout);
    expect(doc.properties.runs.items.properties.statistics).toBeDefined();
  });
});

describe('plumbline report', () => {
  it('writes the debrief package from an assessment document, escaping text from outside', async () => {
    const out = join(dir, 'result-for-debrief.json');
    expect(cli('assess', '--plan', files.plan, '--baseline', files.baseline, '--live', files.live, '--out', out, '--quiet').status).toBe(0);
    const doc = JSON.parse(readFileSync(out, 'utf8'));
    doc.runs[0].track = '<script>alert(1)</script>';
    writeFileSync(out, JSON.stringify(doc));
    const folder = join(dir, 'debrief');
    const r = cli('report', '--in', out, '--out', folder);
    expect(r.status).toBe(0);
    const page = readFileSync(join(folder, 'report.html'), 'utf8');
    expect(page).toContain('&lt;script&gt;alert(1)&lt;/script&gt;');
    expect(page).not.toContain('<script>');
    expect(page).toContain('Statistical agreement is evidence, not accreditation.');
    expect(page).toMatch(/Holm/);
    expect(page).not.toMatch(/src="http|href="http/);
    const bad = cli('report', '--in', files.plan);
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/not an assessment document/);
  });

  it('--help on a command prints the usage and exits 0', () => {
    const r = cli('demo', '--help');
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/usage: plumbline/);
  });
});
