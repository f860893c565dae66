/**
 * Compact storage of a track's committed points: growable columns (sequence numbers, times, and
 * the values interleaved, one Float64Array each) instead of one object per point. A point costs
 * (2 + channels) × 8 bytes, plus at most as much again of spare capacity while the columns grow
 * by doubling.
 *
 * Points are kept in the order they were committed. While every sequence number is the next one
 * (1, 2, 3, ..., the usual case) point seq lives at index seq − 1 and no index is kept; the first
 * point out of that order builds a map from sequence number to index, kept from then on.
 *
 * `RecentTimes` holds the times a duplicate-time check still needs: a point earlier than the
 * latest committed time by more than the reorder tolerance is refused as reversed before its time
 * is looked up, so older times are pruned and the set stays as small as the tolerance window.
 */

/** One point as the service stages it; values in plan channel order. */
export interface StoredPoint {
  readonly seq: number;
  readonly t: number;
  readonly values: Float64Array;
}

const INITIAL_CAPACITY = 64;

export class PointStore {
  private n = 0;
  private seqs = new Float64Array(0);
  private ts = new Float64Array(0);
  private vals = new Float64Array(0);
  /** Sequence number → index, built when a point arrives out of sequence order. */
  private index?: Map<number, number>;
  /** True while the times are non-decreasing in storage order (no sort needed for the engine). */
  private timeOrdered = true;
  private latest = Number.NEGATIVE_INFINITY;

  constructor(readonly channels: number) {
    if (!(Number.isInteger(channels) && channels >= 1)) throw new RangeError(`PointStore: channels must be a positive integer, got ${channels}`);
  }

  get size(): number {
    return this.n;
  }

  /** Latest time committed (0 when empty, as a new track's maxT). */
  get maxT(): number {
    return this.n === 0 ? 0 : this.latest;
  }

  /** Storage index of point `seq`, or −1. */
  indexOf(seq: number): number {
    if (this.index) return this.index.get(seq) ?? -1;
    return Number.isInteger(seq) && seq >= 1 && seq <= this.n ? seq - 1 : -1;
  }

  has(seq: number): boolean {
    return this.indexOf(seq) >= 0;
  }

  tAt(i: number): number {
    return this.ts[i];
  }

  /** Is point `seq` stored with exactly this time and these values (plan order)? undefined when absent. */
  same(seq: number, t: number, values: ArrayLike<number>): boolean | undefined {
    const i = this.indexOf(seq);
    if (i < 0) return undefined;
    if (this.ts[i] !== t) return false;
    const C = this.channels;
    for (let c = 0; c < C; c++) if (this.vals[i * C + c] !== values[c]) return false;
    return true;
  }

  /** The point `seq` as an object (allocated on request), or undefined. */
  get(seq: number): StoredPoint | undefined {
    const i = this.indexOf(seq);
    return i < 0 ? undefined : this.pointAt(i);
  }

  /** Add a point, or replace the one with the same sequence number (as `Map.set`). */
  set(seq: number, p: { readonly seq?: number; readonly t: number; readonly values: ArrayLike<number> }): this {
    const C = this.channels;
    if (p.values.length !== C) throw new RangeError(`PointStore: point ${seq} has ${p.values.length} values, the track ${C} channels`);
    const at = this.indexOf(seq);
    if (at >= 0) {
      this.ts[at] = p.t;
      for (let c = 0; c < C; c++) this.vals[at * C + c] = p.values[c];
      this.timeOrdered = this.checkTimeOrder();
      this.latest = this.computeLatest();
      return this;
    }
    const i = this.n;
    if (i === this.ts.length) this.grow();
    if (!this.index && seq !== i + 1) {
      this.index = new Map();
      for (let k = 0; k < i; k++) this.index.set(this.seqs[k], k);
    }
    this.index?.set(seq, i);
    this.seqs[i] = seq;
    this.ts[i] = p.t;
    for (let c = 0; c < C; c++) this.vals[i * C + c] = p.values[c];
    if (i > 0 && p.t < this.ts[i - 1]) this.timeOrdered = false;
    if (p.t > this.latest) this.latest = p.t;
    this.n = i + 1;
    return this;
  }

  /** Every point in storage order, each as a fresh object. */
  *values(): IterableIterator<StoredPoint> {
    for (let i = 0; i < this.n; i++) yield this.pointAt(i);
  }

  clear(): void {
    this.n = 0;
    this.seqs = new Float64Array(0);
    this.ts = new Float64Array(0);
    this.vals = new Float64Array(0);
    this.index = undefined;
    this.timeOrdered = true;
    this.latest = Number.NEGATIVE_INFINITY;
  }

  /**
   * The points sorted by time (ties by storage order, as a stable sort): times and one column per
   * channel, fresh arrays the caller owns.
   */
  columns(): { t: Float64Array; values: Float64Array[] } {
    const n = this.n;
    const C = this.channels;
    let order: Uint32Array | undefined;
    if (!this.timeOrdered) {
      order = new Uint32Array(n);
      for (let i = 0; i < n; i++) order[i] = i;
      // Array.prototype.sort is stable (ECMAScript 2019); typed-array sort is too, with a comparator.
      order.sort((a, b) => this.ts[a] - this.ts[b] || a - b);
    }
    const t = new Float64Array(n);
    const values = Array.from({ length: C }, () => new Float64Array(n));
    for (let k = 0; k < n; k++) {
      const i = order ? order[k] : k;
      t[k] = this.ts[i];
      for (let c = 0; c < C; c++) values[c][k] = this.vals[i * C + c];
    }
    return { t, values };
  }

  /** Bytes held by the columns (capacity, not only the points stored). */
  get bytes(): number {
    return this.seqs.byteLength + this.ts.byteLength + this.vals.byteLength + (this.index ? this.index.size * 16 : 0);
  }

  private pointAt(i: number): StoredPoint {
    const C = this.channels;
    return { seq: this.seqs[i], t: this.ts[i], values: this.vals.slice(i * C, (i + 1) * C) };
  }

  private grow(): void {
    const cap = Math.max(INITIAL_CAPACITY, this.ts.length * 2);
    const seqs = new Float64Array(cap);
    seqs.set(this.seqs);
    const ts = new Float64Array(cap);
    ts.set(this.ts);
    const vals = new Float64Array(cap * this.channels);
    vals.set(this.vals);
    this.seqs = seqs;
    this.ts = ts;
    this.vals = vals;
  }

  private checkTimeOrder(): boolean {
    for (let i = 1; i < this.n; i++) if (this.ts[i] < this.ts[i - 1]) return false;
    return true;
  }

  private computeLatest(): number {
    let m = Number.NEGATIVE_INFINITY;
    for (let i = 0; i < this.n; i++) if (this.ts[i] > m) m = this.ts[i];
    return m;
  }
}

/**
 * The committed times a duplicate-time check can still meet: times more than `tolerance` before
 * the latest one added are dropped (a point that early is refused as reversed before this check).
 */
export class RecentTimes {
  private readonly set = new Set<number>();
  private latest = Number.NEGATIVE_INFINITY;
  private pruneAt = INITIAL_CAPACITY;

  constructor(private readonly tolerance: number) {}

  get size(): number {
    return this.set.size;
  }

  has(t: number): boolean {
    return this.set.has(t);
  }

  add(t: number): this {
    this.set.add(t);
    if (t > this.latest) this.latest = t;
    if (this.set.size >= this.pruneAt) {
      const floor = this.latest - this.tolerance;
      for (const x of this.set) if (x < floor) this.set.delete(x);
      this.pruneAt = Math.max(INITIAL_CAPACITY, 2 * this.set.size);
    }
    return this;
  }

  clear(): void {
    this.set.clear();
    this.latest = Number.NEGATIVE_INFINITY;
    this.pruneAt = INITIAL_CAPACITY;
  }
}
