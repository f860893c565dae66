/**
 * The built-in demo through the real paths (files, service, worker, journal, feed, replay) at full
 * speed: the verdicts are the ones the scenario was built to produce, on three seeds fixed in
 * advance (1, 2, 3). The scenario's truth (ingest/demo/scenario.ts) says the three high-sea-state
 * vignettes disagree and the other six agree; per-vignette verdicts use Holm's adjustment over the
 * nine vignettes, so a false flag among the six agreeing ones has probability of about 3 % a seed.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runDemo } from '../../../ingest/cli/demo.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-demo-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('plumbline demo at full speed', () => {
  for (const seed of [1, 2, 3]) {
    it(`seed ${seed}: the disagreeing conditions are flagged, the agreeing ones are not, the combined evidence is strong`, async () => {
      const lines: string[] = [];
      const { server, report } = await runDemo({ dir: join(dir, `s${seed}`), seed, sims: 200, runs: 2, speed: 0, overlap: 3, port: 0, exitWhenDone: true, out: (l) => lines.push(l) });
      try {
        expect(report).toBeDefined();
        const r = report!;
        expect(r.runs).toHaveLength(18);
        expect(r.runs.every((x) => x.status === 'assessed')).toBe(true);
        const verdicts = Object.fromEntries(r.vignettes.map((v) => [v.id, v.verdict]));
        console.info(`seed ${seed}:`, r.vignettes.map((v) => `${v.id} ${v.adjustedPValue?.toFixed(3)}`).join(', '), `combined ${r.combined?.pValue.toExponential(2)}`);
        for (const id of ['S3-L1', 'S3-L2', 'S3-L3']) expect(verdicts[id], id).toBe('distinguishable');
        for (const id of ['S1-L1', 'S1-L2', 'S1-L3', 'S2-L1', 'S2-L2', 'S2-L3']) expect(verdicts[id], id).toBe('not distinguishable');
        expect(r.combined?.pValue).toBeLessThan(1e-3);
        expect(r.combined?.distinguishable).toBe(true);
        // The dropout run is judged on its observed window and flagged.
        expect(r.runs.find((x) => x.vignette === 'S1-L2' && x.track === 'live-1')?.flags).toContain('dropout');
        // Data-quality flags in the journaled log: the dropout and the bearing glitch, and no others.
        const flags = (r.log ?? []).filter((e) => e.kind === 'flag').map((e) => `${e.vignette}/${e.track} ${e.text.split(':')[0]}`);
        expect(flags).toEqual(['S1-L2/live-1 dropout', 'S2-L3/live-1 jump (bearing)']);
        // Anytime-valid evidence: established for the event and for each disagreeing vignette.
        expect(r.sequential?.established).toBe(true);
        for (const id of ['S3-L1', 'S3-L2', 'S3-L3']) expect(r.sequential?.vignettes.find((v) => v.id === id)?.established, id).toBe(true);
        // Practically: the S3 runs leave the range band by more than the plan's 25 m tolerance.
        // Their kind is timing (they lose speed in the turn and arrive late; test/ingest/demo/timing.test.ts
        // checks the size of the lag against the generator).
        const s3 = r.runs.filter((x) => x.vignette.startsWith('S3'));
        console.info(`seed ${seed} S3 diagnoses:`, s3.map((x) => `${x.vignette}/${x.track} ${x.diagnosis?.kind} ${x.diagnosis?.timing ?? ''} ${x.diagnosis?.timeShift?.toFixed(1) ?? ''} s`).join('; '));
        for (const run of s3) {
          const range = run.practical?.find((p) => p.channel === 'range');
          expect(range?.withinTolerance, `${run.vignette}/${run.track}`).toBe(false);
          expect(run.diagnosis?.kind, `${run.vignette}/${run.track}`).toBe('timing');
          expect(run.diagnosis?.timeShift, `${run.vignette}/${run.track}`).toBeGreaterThan(0);
        }
        expect(lines.some((l) => l.includes('Dashboard: http://127.0.0.1:'))).toBe(true);
      } finally {
        await server.close();
      }
    });
  }

  it('a data folder that cannot be written is a clear error', async () => {
    // Under a regular file no folder can be made, even by root.
    const file = join(dir, 'not-a-folder');
    writeFileSync(file, 'x');
    await expect(runDemo({ dir: join(file, 'demo'), seed: 1, sims: 20, runs: 1, speed: 0, overlap: 1, port: 0, exitWhenDone: true, out: () => undefined })).rejects.toMatchObject({ code: 'DATA_DIR_UNWRITABLE' });
  });
});
