/**
 * `plumbline serve` with the plan's `sources.dis` block and `--dis`, as a user runs it (a child
 * process through tsx): PDUs over loopback reach the run, the run closes after the silence, and on
 * SIGINT the source's counters are printed before the journal is committed.
 */
import { spawn } from 'node:child_process';
import { createSocket } from 'node:dgram';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { geodeticToEcef } from '../../../ingest/dis/geodesy.js';
import { encodeTimestamp } from '../../../ingest/dis/time.js';
import { handBuiltPdu } from './hand-built.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-dis-serve-cli-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const main = join(process.cwd(), 'ingest', 'cli', 'main.ts');
const SITE = { lat: 8.125, lon: 142.5, height: 3 }; // invented
const planPath = join(dir, 'plan.json');
writeFileSync(planPath, JSON.stringify({
  name: 'serve --dis (invented)',
  channels: [{ name: 'range', unit: 'm' }, { name: 'bearing', unit: 'deg', period: 360 }],
  vignettes: [{ id: 'C3', horizon: 100 }],
  // the plan listens on 3000; --dis moves it to a free loopback port
  sources: { dis: { listen: 'udp://0.0.0.0:3000', silence: 1, sites: { slipway: SITE }, entities: [{ site: 5, application: 6, entity: 7, vignette: 'C3', track: 'usv-7', sensor: 'slipway' }] } },
}));

describe('plumbline serve --dis', () => {
  it('receives PDUs in the service, closes the run after the silence, prints the counters on SIGINT', async () => {
    const child = spawn(process.execPath, ['--import', 'tsx', main, 'serve', '--plan', planPath, '--journal', join(dir, 'j.sqlite'), '--port', '0', '--dis', 'udp://127.0.0.1:0'], { stdio: ['ignore', 'ignore', 'pipe'] });
    let err = '';
    child.stderr.on('data', (d: Buffer) => (err += d.toString()));
    const tx = createSocket('udp4');
    try {
      const [udpPort, url] = await new Promise<[number, string]>((res, rej) => {
        const timer = setTimeout(() => rej(new Error(`not serving: ${err}`)), 60_000);
        child.stderr.on('data', () => {
          const m = /listening for DIS Entity State PDUs on udp:\/\/127\.0\.0\.1:(\d+)/.exec(err);
          const s = /plumbline is serving (http:\/\/\S+)/.exec(err);
          if (m && s) {
            clearTimeout(timer);
            res([Number(m[1]), s[1]]);
          }
        });
      });
      const [x, y, z] = geodeticToEcef({ ...SITE, lat: SITE.lat + 0.02 });
      const send = (b: Uint8Array) => new Promise<void>((res, rej) => tx.send(b, udpPort, '127.0.0.1', (e) => (e ? rej(e) : res())));
      for (let k = 0; k < 6; k++) await send(handBuiltPdu({ version: 7, site: 5, application: 6, entity: 7, timestamp: encodeTimestamp(k, false), location: [x, y, z + k] }));
      await send(new Uint8Array([7, 0, 0]));
      const until = Date.now() + 20_000;
      let run: { status?: string; points?: number } | undefined;
      while (Date.now() < until && run?.status !== 'complete') {
        await new Promise((r) => setTimeout(r, 100));
        const res = await fetch(`${url}/api/runs/C3/usv-7`);
        run = res.ok ? ((await res.json()) as { run: typeof run }).run : undefined;
      }
      expect(run).toMatchObject({ status: 'complete', points: 6 });
      expect(err).toMatch(/run C3\/usv-7 closing \(silence\)/);
      expect(err).toMatch(/DIS: PDU_SHORT_HEADER: /);
      child.kill('SIGINT');
      const code = await new Promise<number | null>((res) => child.once('exit', (c) => res(c)));
      expect(code).toBe(0);
      expect(err).toMatch(/6 points in 1 runs \(1 closed\)/);
      expect(err).toMatch(/bad PDUs: PDU_SHORT_HEADER 1/);
      expect(err).toMatch(/refused by the service: none/);
      expect(err.indexOf('refused by the service')).toBeLessThan(err.indexOf('stopping: committing the journal'));
    } finally {
      tx.close();
      if (child.exitCode === null) child.kill('SIGKILL');
    }
  });
});
