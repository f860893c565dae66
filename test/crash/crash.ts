/**
 * `npm run crash`: the full crash test (test/crash/harness.ts): 20 SIGKILLs while producers stream,
 * 5 during start-up and 5 during model refits; prints what it measured and exits 1 on any problem.
 * Options: --stream N --load N --refit N --seed N --sims N --runs N --speed X.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parseArgs } from 'node:util';
import { runCrash } from './harness.js';

const { values } = parseArgs({
  options: {
    stream: { type: 'string', default: '20' },
    load: { type: 'string', default: '5' },
    refit: { type: 'string', default: '5' },
    seed: { type: 'string', default: '1' },
    sims: { type: 'string', default: '40' },
    runs: { type: 'string', default: '2' },
    speed: { type: 'string', default: '2' },
  },
});
const dir = mkdtempSync(join(tmpdir(), 'plumbline-crash-'));
const started = Date.now();
try {
  const s = await runCrash({
    dir,
    streamKills: Number(values.stream),
    loadKills: Number(values.load),
    refitKills: Number(values.refit),
    seed: Number(values.seed),
    simsPerVignette: Number(values.sims),
    liveRunsPerVignette: Number(values.runs),
    speed: Number(values.speed),
    log: (l) => console.log(l),
  });
  const sorted = [...s.restartMs].sort((a, b) => a - b);
  console.log(`\nkills: ${s.kills.stream} while streaming, ${s.kills.load} during start-up, ${s.kills.refit} during refits`);
  console.log(`producers: ${s.producers} live runs, ${s.points} points; ${s.reconnects} reconnects; ${s.resumedAhead} resumes past the last acknowledgement (committed, ack lost in the kill)`);
  console.log(`start-up to serving: median ${sorted[Math.floor(sorted.length / 2)]} ms, max ${sorted[sorted.length - 1]} ms over ${sorted.length} starts`);
  console.log(`wall time: ${((Date.now() - started) / 1000).toFixed(1)} s`);
  if (s.problems.length > 0) {
    console.log(`\n${s.problems.length} problem(s):`);
    for (const p of s.problems.slice(0, 50)) console.log(`  ${p}`);
    process.exitCode = 1;
  } else {
    console.log('every acknowledged point is in the journal exactly once; results equal the uninterrupted assessment');
  }
} finally {
  if (process.env.PLUMBLINE_KEEP) console.log(`kept ${dir}`);
  else rmSync(dir, { recursive: true, force: true });
}
