/**
 * DIS time stamps and a run's track clock.
 *
 * A DIS timestamp is a u32: bits 31..1 count units past the top of the hour, 2^31 units per hour
 * (3600 / 2^31 s ≈ 1.676 µs each); bit 0 is 1 for absolute time (the sender's clock is set to UTC)
 * and 0 for relative time (a free-running clock of the sender, comparable only within one sender).
 * Source: IEEE 1278.1 (timestamp record), as documented by open-dis `disutil/DisTime` and dis-rs
 * `common/timestamp.rs`.
 *
 * The hour is not sent, so it is reconstructed: each new stamp is placed in the hour that brings it
 * nearest to the time expected from the previous stamp plus the receive time elapsed since (or the
 * previous stamp alone when no receive time is known, which assumes gaps under half an hour).
 * Track time is the reconstructed time minus that of the run's first PDU, in seconds; the clock
 * refuses a stamp that does not move strictly forward, so track time is strictly increasing.
 */

/** Seconds per timestamp unit (2^31 units per hour). */
export const DIS_TIME_UNIT = 3600 / 2 ** 31;
const HOUR = 3600;

export interface DisTimestamp {
  /** Seconds past the top of the hour, in [0, 3600). */
  readonly secondsPastHour: number;
  /** true: absolute (UTC) time; false: relative time. */
  readonly absolute: boolean;
}

export function parseTimestamp(raw: number): DisTimestamp {
  const u = raw >>> 0;
  return { secondsPastHour: (u >>> 1) * DIS_TIME_UNIT, absolute: (u & 1) === 1 };
}

/** Encode seconds past the hour (wrapped into [0, 3600)) as a DIS timestamp. */
export function encodeTimestamp(secondsPastHour: number, absolute: boolean): number {
  const s = ((secondsPastHour % HOUR) + HOUR) % HOUR;
  const units = Math.min(2 ** 31 - 1, Math.round(s / DIS_TIME_UNIT));
  return ((units * 2) + (absolute ? 1 : 0)) >>> 0;
}

export type ClockReading =
  | { readonly ok: true; readonly t: number }
  | { readonly ok: false; readonly reason: 'not-after' | 'kind-changed'; readonly t?: number };

/** Track clock of one run: reconstructs the hour and gives seconds from the run's first PDU. */
export class TrackClock {
  private start?: number;
  private last = Number.NEGATIVE_INFINITY;
  private lastReceived?: number;
  private kind?: boolean;

  /**
   * Place a timestamp on the run's time line.
   * @param raw the PDU's timestamp field
   * @param receivedAtMs arrival time (ms, any monotone clock), used to reconstruct hour rollovers
   */
  read(raw: number, receivedAtMs?: number): ClockReading {
    const ts = parseTimestamp(raw);
    if (this.start === undefined) {
      this.start = ts.secondsPastHour;
      this.last = ts.secondsPastHour;
      this.kind = ts.absolute;
      this.lastReceived = receivedAtMs;
      return { ok: true, t: 0 };
    }
    if (ts.absolute !== this.kind) return { ok: false, reason: 'kind-changed' };
    const elapsed = receivedAtMs !== undefined && this.lastReceived !== undefined ? Math.max(0, (receivedAtMs - this.lastReceived) / 1000) : 0;
    const expected = this.last + elapsed;
    const hour = Math.round((expected - ts.secondsPastHour) / HOUR);
    const absoluteSeconds = hour * HOUR + ts.secondsPastHour;
    const t = absoluteSeconds - this.start;
    if (absoluteSeconds <= this.last) return { ok: false, reason: 'not-after', t };
    this.last = absoluteSeconds;
    if (receivedAtMs !== undefined) this.lastReceived = receivedAtMs;
    return { ok: true, t };
  }
}
