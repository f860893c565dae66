/**
 * The short crash test CI runs (the full one is `npm run crash`): the real service, killed with
 * SIGKILL three times while nine producers stream, once during start-up and once while its worker
 * refits; every acknowledged point must be in the journal exactly once and the results must equal
 * the uninterrupted batch assessment (test/crash/harness.ts says how each is checked). Needs the
 * build (dist/), which `npm ci` makes.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { runCrash } from './harness.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-crash-ci-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('SIGKILL while streaming, during start-up and during a refit', () => {
  it('loses and doubles nothing acknowledged, and changes no result', { timeout: 600_000 }, async () => {
    const lines: string[] = [];
    const s = await runCrash({ dir, streamKills: 3, loadKills: 1, refitKills: 1, seed: 2, simsPerVignette: 20, liveRunsPerVignette: 1, speed: 12, log: (l) => lines.push(l) });
    console.log(`${lines.join('\n')}\nrestarts to serving (ms): ${s.restartMs.join(', ')}; reconnects ${s.reconnects}; resumes past the last ack ${s.resumedAhead}`);
    expect(s.problems).toEqual([]);
    expect(s.kills).toEqual({ stream: 3, load: 1, refit: 1 });
    expect(s.reconnects).toBeGreaterThan(0);
  });
});
