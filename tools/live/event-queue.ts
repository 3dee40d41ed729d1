// Pull side of an Observable: values are queued as they arrive and taken one at a time with `await next()`, so
// an async consumer (file writers) paces itself without losing values; the queue is the only buffer.
import type { Observable, Subscription } from 'rxjs';

export interface EventQueue<T> {
  /** The next value; null once the observable completed or `stop()` was called and the queue is empty. Rejects with the observable's error. */
  next(): Promise<T | null>;
  /** Unsubscribes: no further values are queued, those already queued are still handed out. */
  stop(): void;
  /** Values waiting to be taken. */
  readonly length: number;
}

export function queueObservable<T>(observable: Observable<T>): EventQueue<T> {
  let items: T[] = [];
  let head = 0;
  let ended = false;
  let failure: { error: unknown } | null = null;
  let waiting: { resolve: (value: T | null) => void; reject: (error: unknown) => void } | null = null;
  let subscription: Subscription | null = null;

  function wake(): void {
    if (waiting === null) return;
    const waiter = waiting;
    if (head < items.length) {
      waiting = null;
      waiter.resolve(take());
    } else if (failure !== null) {
      waiting = null;
      waiter.reject(failure.error);
    } else if (ended) {
      waiting = null;
      waiter.resolve(null);
    }
  }

  function take(): T {
    const item = items[head++]!;
    // Compact now and then instead of shifting on every take.
    if (head > 1024 && head * 2 > items.length) {
      items = items.slice(head);
      head = 0;
    }
    return item;
  }

  subscription = observable.subscribe({
    next(value) {
      if (ended) return;
      items.push(value);
      wake();
    },
    error(error) {
      failure = { error };
      ended = true;
      wake();
    },
    complete() {
      ended = true;
      wake();
    },
  });

  return {
    next() {
      if (head < items.length) return Promise.resolve(take());
      if (failure !== null) return Promise.reject(failure.error);
      if (ended) return Promise.resolve(null);
      return new Promise<T | null>((resolve, reject) => {
        waiting = { resolve, reject };
      });
    },
    stop() {
      ended = true;
      subscription?.unsubscribe();
      subscription = null;
      wake();
    },
    get length() {
      return items.length - head;
    },
  };
}
