/**
 * DIS timestamps (IEEE 1278.1 timestamp record: 2^31 units per hour past the hour in bits 31..1,
 * bit 0 set for absolute time; as documented by open-dis `DisTime` and dis-rs `timestamp.rs`) and
 * the track clock's hour reconstruction.
 */
import { describe, expect, it } from 'vitest';
import { DIS_TIME_UNIT, encodeTimestamp, parseTimestamp, TrackClock } from '../../../ingest/dis/time.js';

describe('timestamp fields', () => {
  it('the unit is 3600 / 2^31 s (about 1.676 µs) and bit 0 is the absolute flag', () => {
    expect(DIS_TIME_UNIT).toBeCloseTo(1.6763806e-6, 12);
    expect(parseTimestamp(0)).toEqual({ secondsPastHour: 0, absolute: false });
    expect(parseTimestamp(1)).toEqual({ secondsPastHour: 0, absolute: true });
    // 0x80000000: half of the 2^31 units → 30 minutes, relative
    expect(parseTimestamp(0x8000_0000)).toEqual({ secondsPastHour: 1800, absolute: false });
    const last = parseTimestamp(0xffff_ffff);
    expect(last.absolute).toBe(true);
    expect(3600 - last.secondsPastHour).toBeCloseTo(DIS_TIME_UNIT, 15);
  });
  it('encode/parse round trip to within one unit', () => {
    for (const s of [0, 0.001, 59.5, 1800, 3599.999]) {
      for (const abs of [true, false]) {
        const p = parseTimestamp(encodeTimestamp(s, abs));
        expect(p.absolute).toBe(abs);
        expect(Math.abs(p.secondsPastHour - s)).toBeLessThanOrEqual(DIS_TIME_UNIT);
      }
    }
  });
});

describe('track clock', () => {
  it('track time counts from the first PDU', () => {
    const c = new TrackClock();
    expect(c.read(encodeTimestamp(100, true), 0)).toEqual({ ok: true, t: 0 });
    const r = c.read(encodeTimestamp(102.5, true), 2500);
    expect(r.ok && r.t).toBeCloseTo(2.5, 5);
  });
  it('an hour rollover without receive times: 3599 s → 1 s past the next hour is 2 s later', () => {
    const c = new TrackClock();
    c.read(encodeTimestamp(3599, false));
    const r = c.read(encodeTimestamp(1, false));
    expect(r.ok && r.t).toBeCloseTo(2, 5);
  });
  it('several rollovers in a row over a 3-hour run sampled every 20 minutes', () => {
    const c = new TrackClock();
    const start = 3000;
    c.read(encodeTimestamp(start, true), 0);
    for (let k = 1; k <= 9; k++) {
      const r = c.read(encodeTimestamp(start + 1200 * k, true), 1200_000 * k);
      expect(r.ok && r.t).toBeCloseTo(1200 * k, 4);
    }
  });
  it('a gap longer than half an hour is placed by the receive time (55 min of silence)', () => {
    const c = new TrackClock();
    c.read(encodeTimestamp(600, true), 0);
    const r = c.read(encodeTimestamp(600 + 3300, true), 3300_000);
    expect(r.ok && r.t).toBeCloseTo(3300, 4);
    // without the receive time the nearest hour would put it 5 minutes earlier: refused as not after
    const d = new TrackClock();
    d.read(encodeTimestamp(600, true));
    expect(d.read(encodeTimestamp(3900, true)).ok).toBe(false);
  });
  it('a late (reordered) or repeated stamp is refused; time stays strictly increasing', () => {
    const c = new TrackClock();
    c.read(encodeTimestamp(10, true), 0);
    c.read(encodeTimestamp(11, true), 1000);
    expect(c.read(encodeTimestamp(10.5, true), 1001)).toMatchObject({ ok: false, reason: 'not-after' });
    expect(c.read(encodeTimestamp(11, true), 1002)).toMatchObject({ ok: false, reason: 'not-after' });
    const r = c.read(encodeTimestamp(12, true), 2000);
    expect(r.ok && r.t).toBeCloseTo(2, 5);
  });
  it('a switch between absolute and relative time within a run is refused', () => {
    const c = new TrackClock();
    c.read(encodeTimestamp(10, true));
    expect(c.read(encodeTimestamp(11, false))).toEqual({ ok: false, reason: 'kind-changed' });
  });
});
