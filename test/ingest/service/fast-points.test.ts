/**
 * The feed parser's fast path for `points` messages must accept only what the zod schema accepts
 * (zod 4, the protocol's definition, is the reference), and give the same message. fast-check
 * generates valid messages and damaged ones: any value the fast path accepts, zod accepts too.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { fastPointsMessage, parseClientMessage, pointsSchema } from '../../../ingest/service/protocol.js';

const ident = fc.string({ minLength: 1, maxLength: 140, unit: 'binary' });
const num = fc.oneof(fc.double(), fc.integer(), fc.constantFrom(0, -0, 1, 2 ** 53, 2 ** 53 - 1, -1, 1e308, Number.MAX_VALUE));
const point = fc.record({ seq: num, t: num, values: fc.array(num, { maxLength: 4 }) });
const message = fc.record({
  v: fc.constantFrom(1, 1, 1, 2),
  type: fc.constantFrom('points', 'points', 'open'),
  id: ident,
  vignette: ident,
  track: ident,
  points: fc.array(point, { maxLength: 5 }),
});
const validPoint = fc.record({ seq: fc.integer({ min: 1, max: 2 ** 40 }), t: fc.double({ min: 0, max: 1e6, noNaN: true }), values: fc.array(fc.double({ noNaN: true, noDefaultInfinity: true }), { minLength: 1, maxLength: 4 }) });
const validMessage = fc.record({
  v: fc.constant(1),
  type: fc.constant('points'),
  id: fc.string({ minLength: 1, maxLength: 20 }),
  vignette: fc.string({ minLength: 1, maxLength: 20 }),
  track: fc.string({ minLength: 1, maxLength: 20 }),
  points: fc.array(validPoint, { minLength: 1, maxLength: 20 }),
});

// Through JSON as on the wire: -0 becomes 0, non-finite numbers become null, so both sides see the same value.
const wire = (x: unknown): unknown => JSON.parse(JSON.stringify(x));

describe('fast path of the points parser', () => {
  it('accepts every valid message, equal to what zod gives', () => {
    fc.assert(
      fc.property(validMessage, (m) => {
        const raw = wire(m);
        const z = pointsSchema.safeParse(raw);
        if (!z.success) return; // e.g. a lone surrogate or control character in a generated id
        expect(fastPointsMessage(wire(m))).toEqual(z.data);
      }),
      { numRuns: 500 },
    );
  });

  it('never accepts what zod refuses (random and damaged messages, extra and missing fields)', () => {
    const damaged = fc.tuple(message, fc.constantFrom('none', 'extra', 'missing', 'pointExtra', 'pointMissing', 'proto', 'array')).map(([m, how]) => {
      const x = wire(m) as Record<string, unknown> & { points: Array<Record<string, unknown>> };
      if (how === 'extra') x.extra = 1;
      if (how === 'missing') delete x.track;
      if (how === 'pointExtra' && x.points[0]) x.points[0].w = 1;
      if (how === 'pointMissing' && x.points[0]) delete x.points[0].t;
      if (how === 'proto') return JSON.parse(JSON.stringify(x).replace('{', '{"__proto__":{"x":1},')) as unknown;
      if (how === 'array') return [x];
      return x;
    });
    fc.assert(
      fc.property(damaged, (raw) => {
        if (fastPointsMessage(raw) !== undefined) expect(pointsSchema.safeParse(raw).success).toBe(true);
      }),
      { numRuns: 3000 },
    );
  });

  it('leaves refusals to the schema: same codes and wording as before', () => {
    const r = parseClientMessage('{"v":1,"type":"points","id":"a","vignette":"V1","track":"T","points":[{"seq":0,"t":0,"values":[1]}]}');
    expect(r.ok).toBe(false);
    if (!r.ok) {
      expect(r.error.code).toBe('BAD_MESSAGE');
      expect(r.error.reason).toMatch(/points\.0\.seq/);
    }
    const big = parseClientMessage('{"v":1,"type":"points","id":"a","vignette":"V1","track":"T","points":[{"seq":1,"t":1e400,"values":[1]}]}');
    expect(big.ok).toBe(false);
  });
});
