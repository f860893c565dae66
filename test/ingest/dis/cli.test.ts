/**
 * `plumbline dis-bridge` as a user runs it (a child process through tsx): help, usage and mapping
 * errors with exit code 2, and a run fed over loopback that ends with the summary on SIGINT.
 */
import { spawn, spawnSync } from 'node:child_process';
import { createSocket } from 'node:dgram';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { encodeTimestamp } from '../../../ingest/dis/time.js';
import { geodeticToEcef } from '../../../ingest/dis/geodesy.js';
import { startServer } from '../../../ingest/service/server.js';
import { handBuiltPdu } from './hand-built.js';

const dir = mkdtempSync(join(tmpdir(), 'plumbline-dis-cli-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const main = join(process.cwd(), 'ingest', 'cli', 'main.ts');
const cli = (...args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', main, ...args], { encoding: 'utf8', cwd: process.cwd(), timeout: 60_000 });

const planPath = join(dir, 'plan.json');
const mapPath = join(dir, 'map.json');
const SITE = { lat: -5.5, lon: 101.75, height: 4 }; // invented
writeFileSync(planPath, JSON.stringify({ name: 'cli', channels: [{ name: 'range', unit: 'm' }, { name: 'bearing', unit: 'deg', period: 360 }], vignettes: [{ id: 'V1', horizon: 100 }] }));
writeFileSync(mapPath, JSON.stringify({ sites: { pier: SITE }, entities: [{ site: 1, application: 2, entity: 3, vignette: 'V1', track: 'boat-3', sensor: 'pier' }] }));

describe('plumbline dis-bridge', () => {
  it('--help lists the command', () => {
    const r = cli('dis-bridge', '--help');
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/dis-bridge --listen udp:\/\/HOST:PORT \[--group MULTICAST_ADDR\] --map FILE/);
  });
  it('a bad --listen, --group or --silence exits 2 with the reason', () => {
    expect(cli('dis-bridge', '--listen', 'tcp://1.2.3.4:5', '--map', mapPath, '--plan', planPath)).toMatchObject({ status: 2, stderr: expect.stringMatching(/--listen must look like udp:\/\/HOST:PORT/) });
    expect(cli('dis-bridge', '--listen', 'udp://0.0.0.0:0', '--group', '10.0.0.1', '--map', mapPath, '--plan', planPath)).toMatchObject({ status: 2, stderr: expect.stringMatching(/--group must be a multicast address/) });
    expect(cli('dis-bridge', '--listen', 'udp://0.0.0.0:0', '--silence=0', '--map', mapPath, '--plan', planPath)).toMatchObject({ status: 2, stderr: expect.stringMatching(/--silence must be a number of seconds > 0/) });
  });
  it('a mapping that does not fit the plan exits 2 and lists each problem', () => {
    const bad = join(dir, 'bad.json');
    writeFileSync(bad, JSON.stringify({ sites: { pier: SITE }, entities: [{ site: 1, application: 2, entity: 3, vignette: 'V7', track: 'x', sensor: 'pier' }] }));
    const r = cli('dis-bridge', '--listen', 'udp://127.0.0.1:0', '--map', bad, '--plan', planPath);
    expect(r.status).toBe(2);
    expect(r.stderr).toMatch(/the mapping does not fit the plan/);
    expect(r.stderr).toMatch(/entities\.0\.vignette: "V7" is not a vignette of the plan/);
  });
  it('feeds a run to a running service and prints the counters on SIGINT', async () => {
    const server = await startServer({ planPath, journalPath: join(dir, 'j.sqlite'), port: 0 });
    const child = spawn(process.execPath, ['--import', 'tsx', main, 'dis-bridge', '--listen', 'udp://127.0.0.1:0', '--map', mapPath, '--plan', planPath, '--url', `${server.url.replace('http', 'ws')}/feed`, '--silence', '30'], { stdio: ['ignore', 'ignore', 'pipe'] });
    let err = '';
    child.stderr.on('data', (d: Buffer) => (err += d.toString()));
    const tx = createSocket('udp4');
    try {
      const port = await new Promise<number>((res, rej) => {
        const timer = setTimeout(() => rej(new Error(`no listening line: ${err}`)), 30_000);
        child.stderr.on('data', () => {
          const m = /listening for DIS Entity State PDUs on udp:\/\/127\.0\.0\.1:(\d+)/.exec(err);
          if (m) {
            clearTimeout(timer);
            res(Number(m[1]));
          }
        });
      });
      const [x, y, z] = geodeticToEcef({ ...SITE, lat: SITE.lat + 0.01 });
      for (let k = 0; k < 4; k++) {
        await new Promise<void>((res, rej) => tx.send(handBuiltPdu({ version: 7, site: 1, application: 2, entity: 3, timestamp: encodeTimestamp(k, false), location: [x, y, z + k] }), port, '127.0.0.1', (e) => (e ? rej(e) : res())));
      }
      const until = Date.now() + 15_000;
      while (Date.now() < until && (server.service.detail('V1', 'boat-3')?.run.points ?? 0) < 4) await new Promise((r) => setTimeout(r, 50));
      child.kill('SIGINT');
      const code = await new Promise<number | null>((res) => child.once('exit', (c) => res(c)));
      expect(code).toBe(0);
      expect(err).toMatch(/4 points in 1 runs \(1 closed\)/);
      expect(err).toMatch(/bad PDUs: none/);
      expect(server.service.detail('V1', 'boat-3')?.run.status).toBe('complete');
    } finally {
      tx.close();
      if (child.exitCode === null) child.kill('SIGKILL');
      await server.close();
    }
  });
});
