/**
 * Rate-limited log lines with counts, for events that a bad peer can repeat at datagram rate (bad
 * PDUs, unmapped entities). Per code, the first event of each interval is logged in full; later
 * ones in the same interval are only counted, and `flush` (called on a timer, and at the end)
 * writes one line with the counts of what was held back, so a flood of bad datagrams gives a few
 * lines per interval whatever its rate, and no event goes uncounted.
 *
 *   note(A) note(A) note(B) note(A) | flush | note(A)
 *   "A: …"          "B: …"          | "held back in the last 10 s: A 2" | "A: …"
 */

/** Default interval of the full lines per code, ms. */
export const COUNTED_LOG_INTERVAL_MS = 10_000;

export class CountedLog {
  /** When each code was last logged in full (ms of `now`). */
  private readonly lastFull = new Map<string, number>();
  private held = new Map<string, number>();
  private heldSince?: number;

  constructor(
    private readonly say: (line: string) => void,
    private readonly prefix: string,
    private readonly intervalMs: number = COUNTED_LOG_INTERVAL_MS,
    private readonly now: () => number = () => performance.now(),
  ) {}

  /** One event of `code`; `detail` is logged when this is the first of the code in the interval. */
  note(code: string, detail: () => string): void {
    const t = this.now();
    const last = this.lastFull.get(code);
    if (last === undefined || t - last >= this.intervalMs) {
      this.lastFull.set(code, t);
      this.say(`${this.prefix}: ${code}: ${detail()}`);
      return;
    }
    this.heldSince ??= t;
    this.held.set(code, (this.held.get(code) ?? 0) + 1);
  }

  /** Write one line with the counts held back since the last flush (nothing when none were). */
  flush(): void {
    if (this.held.size === 0) return;
    const total = [...this.held.values()].reduce((a, b) => a + b, 0);
    const seconds = Math.max(0, (this.now() - (this.heldSince ?? this.now())) / 1000);
    const parts = [...this.held.entries()].sort((a, b) => b[1] - a[1]).map(([code, n]) => `${code} ${n}`);
    this.say(`${this.prefix}: ${total} more not logged in the last ${seconds.toFixed(1)} s: ${parts.join(', ')}`);
    this.held = new Map();
    this.heldSince = undefined;
  }
}
