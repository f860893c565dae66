/**
 * RxJS operators of the service pipeline (one concern each; marble-tested in
 * test/ingest/service/operators.test.ts).
 */
import { asapScheduler, groupBy, mergeMap, Observable, timer, type OperatorFunction, type SchedulerLike } from 'rxjs';

/**
 * Collect the values that arrive within one turn of the event loop and emit them as one array.
 * By default the batch is emitted in Node's check phase (`setImmediate`), which follows the poll
 * phase: every frame of every socket read in one poll becomes one batch, which the journal
 * commits in one transaction (nodejs.org/en/learn/asynchronous-work/event-loop-timers-and-nexttick,
 * "setImmediate() vs setTimeout()"). A microtask would end the batch after each socket's read,
 * one transaction per connection per poll. With a `scheduler`, the batch ends when it runs the
 * emission (tests pass rxjs's virtual-time schedulers).
 *
 *   source:  -a-b-----c--|
 *   result:  -(x)-----(y)|     x = [a, b] (same turn), y = [c]   (with a 1-frame scheduler delay)
 */
export function batchPerTurn<T>(scheduler?: SchedulerLike): OperatorFunction<T, T[]> {
  return (source) =>
    new Observable<T[]>((subscriber) => {
      let buffer: T[] = [];
      let scheduled = false;
      const emit = () => {
        scheduled = false;
        const out = buffer;
        buffer = [];
        if (out.length > 0) subscriber.next(out);
      };
      const sub = source.subscribe({
        next(value) {
          buffer.push(value);
          if (!scheduled) {
            scheduled = true;
            if (scheduler) sub.add(scheduler.schedule(emit));
            else {
              const handle = setImmediate(emit);
              sub.add(() => clearImmediate(handle));
            }
          }
        },
        error(e) {
          subscriber.error(e);
        },
        complete() {
          emit();
          subscriber.complete();
        },
      });
      return () => {
        sub.unsubscribe();
        buffer = [];
      };
    });
}

/**
 * Emit at most one value per `periodMs`: the first at once, then the latest of each period; a
 * value still pending when the source completes is emitted before completion (nothing final is
 * lost). Buffers at most one value.
 *
 *   source:  a-b-c---------d-|        period 5
 *   result:  a----c--------d-|
 */
export function conflate<T>(periodMs: number, scheduler: SchedulerLike = asapScheduler): OperatorFunction<T, T> {
  return (source) =>
    new Observable<T>((subscriber) => {
      let pending: { value: T } | undefined;
      let quietUntil = Number.NEGATIVE_INFINITY;
      let timerSub: { unsubscribe(): void } | undefined;
      const release = () => {
        timerSub = undefined;
        if (pending) {
          const v = pending.value;
          pending = undefined;
          quietUntil = scheduler.now() + periodMs;
          subscriber.next(v);
          timerSub = scheduler.schedule(release, periodMs);
        }
      };
      const sub = source.subscribe({
        next(value) {
          if (!timerSub && scheduler.now() >= quietUntil) {
            quietUntil = scheduler.now() + periodMs;
            subscriber.next(value);
            timerSub = scheduler.schedule(release, periodMs);
          } else {
            pending = { value };
          }
        },
        error(e) {
          subscriber.error(e);
        },
        complete() {
          if (pending) subscriber.next(pending.value);
          pending = undefined;
          subscriber.complete();
        },
      });
      return () => {
        sub.unsubscribe();
        timerSub?.unsubscribe();
        pending = undefined;
      };
    });
}

/**
 * Conflate per key: one `conflate` per key (a run, a vignette), each group released after
 * `idleMs` without values (or when `isLast` says the key is finished), so no per-key state outlives
 * its key.
 */
export function conflatePerKey<T>(
  key: (value: T) => string,
  periodMs: number,
  options: { idleMs?: number; isLast?: (value: T) => boolean; scheduler?: SchedulerLike } = {},
): OperatorFunction<T, T> {
  const scheduler = options.scheduler ?? asapScheduler;
  const idleMs = options.idleMs ?? 60_000;
  return (source) =>
    source.pipe(
      groupBy(key, {
        duration: (group) =>
          new Observable<void>((subscriber) => {
            let idle = timer(idleMs, scheduler).subscribe(() => subscriber.next());
            const sub = group.subscribe((v) => {
              idle.unsubscribe();
              if (options.isLast?.(v)) {
                // Let the conflated group flush this last value, then end the group.
                scheduler.schedule(() => subscriber.next());
                return;
              }
              idle = timer(idleMs, scheduler).subscribe(() => subscriber.next());
            });
            return () => {
              idle.unsubscribe();
              sub.unsubscribe();
            };
          }),
      }),
      mergeMap((group) => group.pipe(conflate(periodMs, scheduler))),
    );
}

/**
 * Gather values for `windowMs` from the first value of a window, then emit, as one array, one
 * value per key in the order the keys first arrived: the latest, or what `merge(kept, next)`
 * makes of each newer one. A window still open when the source completes is emitted before
 * completion. Holds only the keys of the open window.
 *
 *   source:  a1-b1-a2-------b2--|     window 4, key = the letter
 *   result:  ----(x)--------(y)-|     x = [a2, b1], y = [b2] (emitted at completion)
 */
export function latestPerKeyPerWindow<T>(
  key: (value: T) => string,
  windowMs: number,
  options: { merge?: (kept: T, next: T) => T; scheduler?: SchedulerLike } = {},
): OperatorFunction<T, T[]> {
  const scheduler = options.scheduler ?? asapScheduler;
  const merge = options.merge ?? ((_kept: T, next: T) => next);
  return (source) =>
    new Observable<T[]>((subscriber) => {
      let open = new Map<string, T>();
      let timerSub: { unsubscribe(): void } | undefined;
      const emit = () => {
        timerSub = undefined;
        const out = [...open.values()];
        open = new Map();
        if (out.length > 0) subscriber.next(out);
      };
      const sub = source.subscribe({
        next(value) {
          const k = key(value);
          const kept = open.get(k);
          open.set(k, kept === undefined ? value : merge(kept, value));
          timerSub ??= scheduler.schedule(emit, windowMs);
        },
        error(e) {
          subscriber.error(e);
        },
        complete() {
          timerSub?.unsubscribe();
          emit();
          subscriber.complete();
        },
      });
      return () => {
        sub.unsubscribe();
        timerSub?.unsubscribe();
        open = new Map();
      };
    });
}
