import { asapScheduler, Subject } from 'rxjs';
import { TestScheduler } from 'rxjs/testing';
import { describe, expect, it } from 'vitest';
import { batchPerTurn, conflate, conflatePerKey, latestPerKeyPerWindow } from '../../../ingest/service/operators.js';

const scheduler = () => new TestScheduler((actual, expected) => expect(actual).toEqual(expected));

describe('batchPerTurn', () => {
  it('groups values of one turn; flushes on completion; errors pass through', () => {
    scheduler().run(({ cold, expectObservable }) => {
      // The test scheduler runs "same turn" work at the same virtual frame.
      const s = cold('(ab)-c-|');
      expectObservable(s.pipe(batchPerTurn(asapScheduler))).toBe('(x)--y-|', { x: ['a', 'b'], y: ['c'] });
      const e = cold('a-#');
      expectObservable(e.pipe(batchPerTurn(asapScheduler))).toBe('x-#', { x: ['a'] });
    });
  });

  it('releases its buffer on early unsubscribe', () => {
    scheduler().run(({ cold, expectObservable }) => {
      expectObservable(cold('a-b-c-|').pipe(batchPerTurn(asapScheduler)), '^--!').toBe('x-y-', { x: ['a'], y: ['b'] });
    });
  });

  it('by default, one batch per event-loop turn: callbacks of one phase share a batch', async () => {
    // Two timers due at once run in the same timers phase, with microtasks drained between them
    // (Node's documented order since v11: nodejs.org/en/learn/asynchronous-work/event-loop-timers-and-nexttick);
    // a microtask-ended batch would split them, the check-phase batch keeps them together.
    const s = new Subject<string>();
    const batches: string[][] = [];
    const sub = s.pipe(batchPerTurn()).subscribe((b) => batches.push(b));
    await new Promise<void>((done) => {
      setTimeout(() => s.next('a'), 0);
      setTimeout(() => s.next('b'), 0);
      setTimeout(() => setImmediate(done), 5);
    });
    s.next('c');
    await new Promise<void>((done) => setImmediate(done));
    sub.unsubscribe();
    expect(batches).toEqual([['a', 'b'], ['c']]);
  });
});

describe('conflate', () => {
  it('passes the first value, then the latest per period', () => {
    scheduler().run(({ cold, expectObservable }) => {
      expectObservable(cold('abc---------d-|').pipe(conflate(5))).toBe('a----c------d-|');
    });
  });

  it('emits the pending value before completing (nothing final is lost)', () => {
    scheduler().run(({ cold, expectObservable }) => {
      expectObservable(cold('ab|').pipe(conflate(5))).toBe('a-(b|)');
    });
  });

  it('passes errors and stops on unsubscribe', () => {
    scheduler().run(({ cold, expectObservable }) => {
      expectObservable(cold('ab#').pipe(conflate(5))).toBe('a-#');
      expectObservable(cold('a-b-c-d-e').pipe(conflate(3)), '^----!').toBe('a--b-');
    });
  });
});

describe('conflatePerKey', () => {
  it('conflates each key separately at the set rate, whatever the input rate', () => {
    scheduler().run(({ cold, expectObservable }) => {
      const values = { a: 'r1', b: 'r2', c: 'r1', d: 'r1', e: 'r2' };
      // r1 at frames 0, 2, 3 and r2 at 1, 4: each key at most once per 10 frames, latest value kept.
      expectObservable(cold('abcde', values).pipe(conflatePerKey((v) => v, 10, { idleMs: 100 }))).toBe('ab--------cd', { a: 'r1', b: 'r2', c: 'r1', d: 'r2' });
    });
  });

  it('releases a key after the idle time and starts afresh when it comes back', () => {
    scheduler().run(({ cold, expectObservable }) => {
      const src = cold('a 30ms a', { a: 'k' });
      expectObservable(src.pipe(conflatePerKey((v) => v, 5, { idleMs: 10 }))).toBe('a 30ms a', { a: 'k' });
    });
  });

  it('keeps no group alive after isLast: a subject with many keys leaves nothing behind', () => {
    const tick = new TestScheduler((a, b) => expect(a).toEqual(b));
    tick.run(({ flush }) => {
      const src = new Subject<{ key: string; last: boolean }>();
      const out: string[] = [];
      src.pipe(conflatePerKey((v) => v.key, 5, { isLast: (v) => v.last, idleMs: 1e9 })).subscribe((v) => out.push(`${v.key}${v.last ? '!' : ''}`));
      for (let i = 0; i < 100; i++) {
        src.next({ key: `k${i}`, last: false });
        src.next({ key: `k${i}`, last: true });
      }
      flush();
      // every key delivered its first and its last value
      expect(out.filter((s) => s.endsWith('!'))).toHaveLength(100);
      expect(out).toHaveLength(200);
    });
  });
});

describe('latestPerKeyPerWindow', () => {
  const values = { a: 'x1', b: 'y1', c: 'x2', d: 'y2', e: 'x3' };
  const key = (v: string) => v[0];

  it('emits one array per window: the latest of each key, in first-arrival order; flushes on completion', () => {
    scheduler().run(({ cold, expectObservable }) => {
      expectObservable(cold('a-b-c-------d--|', values).pipe(latestPerKeyPerWindow(key, 5))).toBe('-----x---------(y|)', { x: ['x2', 'y1'], y: ['y2'] });
    });
  });

  it('merges values of one key with the given function', () => {
    scheduler().run(({ cold, expectObservable }) => {
      // keep the value with the smaller number: a summary that must not be replaced by a lesser one
      const merge = (kept: string, next: string) => (Number(kept[1]) < Number(next[1]) ? kept : next);
      expectObservable(cold('a-c-e|', values).pipe(latestPerKeyPerWindow(key, 3, { merge }))).toBe('---x-(y|)', { x: ['x1'], y: ['x3'] });
    });
  });

  it('errors pass through; nothing is emitted after unsubscribe', () => {
    scheduler().run(({ cold, expectObservable }) => {
      expectObservable(cold('a-#', values).pipe(latestPerKeyPerWindow(key, 5))).toBe('--#');
      expectObservable(cold('a-b------|', values).pipe(latestPerKeyPerWindow(key, 5)), '^--!').toBe('---');
    });
  });
});
