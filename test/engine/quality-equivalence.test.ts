/**
 * The data-quality monitor (engine/quality.ts) against its previous implementation, kept verbatim as
 * a test oracle in test/support/quality-reference.ts: on seeded random tracks with dropouts,
 * glitches, persistent steps, frozen runs, repeated times, NaN readings, reorderings within the
 * tolerance and time reversals (test/support/quality-tracks.ts), both must raise the same flags in
 * the same order: kind, extent (t, tEnd), channel and detail text. The oracle is the outside
 * reference here; its own behaviour is checked against published rules in quality.test.ts.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import * as current from '../../engine/quality.js';
import type { QualityChannel, QualityFlag, QualityOptions, QualityPoint } from '../../engine/quality.js';
import * as reference from '../support/quality-reference.js';
import { PLAIN_CHANNELS, RATE_CHANNELS, qualityTrack } from '../support/quality-tracks.js';

/** What the two monitors have in common (their state types differ). */
interface Monitor<S> {
  initialQuality(options: QualityOptions): S;
  observePoint(state: S, point: QualityPoint): { state: S; flags: QualityFlag[] };
  closeTrack(state: S, horizon: number): QualityFlag[];
}

function flagsOf<S>(m: Monitor<S>, points: readonly QualityPoint[], options: QualityOptions): QualityFlag[] {
  let s = m.initialQuality(options);
  const flags: QualityFlag[] = [];
  for (const p of points) {
    const r = m.observePoint(s, p);
    s = r.state;
    flags.push(...r.flags);
  }
  return [...flags, ...m.closeTrack(s, points[points.length - 1].t + 3)];
}

describe('engine/quality.ts gives the flags of the previous implementation', () => {
  const cases: Array<[string, readonly QualityChannel[]]> = [
    ['channels with rate bounds (jump check)', RATE_CHANNELS],
    ['channels without rate bounds', PLAIN_CHANNELS],
  ];
  for (const [label, channels] of cases) {
    it(`property: ${label}, random tracks at 2 to 50 Hz`, () => {
      fc.assert(
        fc.property(
          fc.integer({ min: 1, max: 1_000_000 }),
          fc.constantFrom(2, 10, 50),
          fc.constantFrom(0, 0.05, 0.3),
          fc.integer({ min: 3, max: 8 }),
          (seed, hz, lateShare, maxJumpSamples) => {
            const points = qualityTrack({ seed, n: 1500, hz, tolerance: 5, lateShare });
            const options: QualityOptions = { channels, reorderTolerance: 5, maxJumpSamples };
            const expected = flagsOf(reference, points, options);
            expect(expected.length).toBeGreaterThan(0);
            expect(flagsOf(current, points, options)).toEqual(expected);
          },
        ),
        { seed: 20261202, numRuns: 30 },
      );
    });
  }

  it('the kinds the tracks exercise: every flag kind is raised somewhere', () => {
    const kinds = new Set<string>();
    for (let seed = 1; seed <= 6; seed++) {
      const points = qualityTrack({ seed, n: 3000, hz: 10, tolerance: 5, lateShare: 0.1 });
      for (const f of flagsOf(current, points, { channels: RATE_CHANNELS, reorderTolerance: 5, shortTolerance: 1 })) kinds.add(f.kind);
      for (const f of current.closeTrack(current.initialQuality({ channels: RATE_CHANNELS }), 100)) kinds.add(f.kind);
    }
    expect([...kinds].sort()).toEqual(['dropout', 'frozen', 'jump', 'short', 'time-reversal']);
  });
});
