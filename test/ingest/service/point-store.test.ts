/**
 * The compact point columns against a plain Map of point objects (the storage they replace) and
 * a stable sort by time (ECMAScript's Array.prototype.sort is stable since ES2019), on random
 * orders of arrival generated with fast-check.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { PointStore, RecentTimes } from '../../../ingest/service/point-store.js';

const arrival = fc
  .array(fc.record({ seq: fc.integer({ min: 1, max: 300 }), t: fc.integer({ min: 0, max: 10_000 }).map((x) => x / 10), a: fc.double({ noNaN: true }), b: fc.double({ noNaN: true }) }), { maxLength: 400 })
  .chain((pts) => fc.boolean().map((inOrder) => (inOrder ? pts.map((p, i) => ({ ...p, seq: i + 1 })) : pts)));

describe('PointStore', () => {
  it('holds what a Map of point objects holds, and sorts by time as a stable sort does', () => {
    fc.assert(
      fc.property(arrival, (pts) => {
        const store = new PointStore(2);
        const ref = new Map<number, { t: number; values: number[] }>();
        for (const p of pts) {
          store.set(p.seq, { t: p.t, values: [p.a, p.b] });
          ref.set(p.seq, { t: p.t, values: [p.a, p.b] });
        }
        expect(store.size).toBe(ref.size);
        expect(store.maxT).toBe(ref.size ? Math.max(...[...ref.values()].map((p) => p.t)) : 0);
        for (const [seq, p] of ref) {
          expect(store.has(seq)).toBe(true);
          expect(store.same(seq, p.t, p.values)).toBe(true);
          expect(store.same(seq, p.t + 1, p.values)).toBe(false);
          expect(Array.from(store.get(seq)!.values)).toEqual(p.values);
        }
        expect(store.has(0)).toBe(false);
        expect(store.same(10_000, 0, [0, 0])).toBeUndefined();
        expect([...store.values()].map((p) => p.seq)).toEqual([...ref.keys()]);
        const sorted = [...ref.values()].sort((x, y) => x.t - y.t);
        const cols = store.columns();
        expect(Array.from(cols.t)).toEqual(sorted.map((p) => p.t));
        expect(Array.from(cols.values[0])).toEqual(sorted.map((p) => p.values[0]));
        expect(Array.from(cols.values[1])).toEqual(sorted.map((p) => p.values[1]));
      }),
      { numRuns: 300 },
    );
  });

  it('costs (2 + channels) × 8 bytes a point, within the doubling of its capacity', () => {
    const store = new PointStore(2);
    for (let i = 1; i <= 100_000; i++) store.set(i, { t: i / 50, values: [i, -i] });
    expect(store.bytes).toBeGreaterThanOrEqual(100_000 * 32);
    expect(store.bytes).toBeLessThanOrEqual(2 * 100_000 * 32);
    store.clear();
    expect(store.size).toBe(0);
    expect(store.bytes).toBe(0);
  });
});

describe('RecentTimes', () => {
  it('answers as a full set for every time within the tolerance of the latest, and stays that small', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: 2000 }).map((x) => x / 4), { maxLength: 600 }), fc.integer({ min: 0, max: 500 }).map((x) => x / 4), (times, probe) => {
        const tol = 5;
        const recent = new RecentTimes(tol);
        const all = new Set<number>();
        for (const t of times) {
          recent.add(t);
          all.add(t);
        }
        const latest = Math.max(...times);
        for (const t of [...all, probe]) if (t >= latest - tol) expect(recent.has(t)).toBe(all.has(t));
        // 4 distinct times per second, a 5 s tolerance: at most 21 current ones, twice that before a prune.
        expect(recent.size).toBeLessThanOrEqual(Math.max(64, 2 * 21 + 1));
      }),
      { numRuns: 300 },
    );
  });
});
