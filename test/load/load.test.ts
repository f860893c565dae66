/**
 * The short load run CI makes (the full one is `npm run load`; figures are printed, never asserted
 * against a time): 10 producers at 20 Hz for 3 s with 2 dashboards, on the built service. Checks
 * only what must hold at any speed: every point sent is acknowledged, none refused, every
 * dashboard saw the runs advance, and the figures are numbers.
 */
import { describe, expect, it } from 'vitest';
import { formatFigures, runLoad } from './load.js';

describe('a short bounded load', () => {
  it('acknowledges every point and reports its figures', { timeout: 120_000 }, async () => {
    const f = await runLoad({ producers: 10, hz: 20, seconds: 3, dashboards: 2, neverReading: false });
    console.log(formatFigures(f));
    expect(f.sent).toBe(10 * 20 * 3);
    expect(f.acknowledged).toBe(f.sent);
    expect(f.errors).toBe(0);
    expect(f.latencyMs.samples).toBe(2 * f.sent);
    for (const x of [f.latencyMs.p50, f.latencyMs.p99, f.eventLoopMs.p99, f.rssMiB.peak]) expect(Number.isFinite(x)).toBe(true);
  });

  it('refuses loads beyond its bounds', async () => {
    await expect(runLoad({ producers: 501, hz: 50, seconds: 1, dashboards: 0, neverReading: false })).rejects.toThrow(/producers/);
    await expect(runLoad({ producers: 1, hz: 50, seconds: 901, dashboards: 0, neverReading: false })).rejects.toThrow(/seconds/);
  });
});
