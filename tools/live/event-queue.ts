// Pull side of an Observable: values are queued as they arrive and taken one at a time with `await next()`, so
// an async consumer (file writers) paces itself without losing values; the queue is the only buffer, and it is
// bounded: past `maxSize` the queue stops taking values and says so, instead of growing while the consumer stalls.
import type { Observable, Subscription } from 'rxjs';

export interface EventQueue<T> {
  /** The next value; null once the observable completed or `stop()` was called and the queue is empty. Rejects with the observable's error. */
  next(): Promise<T | null>;
  /** The next value when one is waiting (taken), else undefined: never waits. */
  poll(): T | undefined;
  /** The next value when one is waiting, left in the queue; else undefined. */
  peek(): T | undefined;
  /** Unsubscribes: no further values are queued, those already queued are still handed out. */
  stop(): void;
  /** Values waiting to be taken. */
  readonly length: number;
  /** Sum of `sizeOf` over the values waiting. */
  readonly size: number;
}

export interface EventQueueOptions<T> {
  /** Most `sizeOf` summed over the values waiting; one more value and the queue overflows. Default: unbounded. */
  readonly maxSize?: number;
  /** Size of one value (e.g. its bytes). Default 1. */
  readonly sizeOf?: (value: T) => number;
  /** Called once when a value would take the queue past `maxSize`: the queue has stopped (`stop()`), that value is dropped. */
  readonly onOverflow?: () => void;
}

export function queueObservable<T>(observable: Observable<T>, options: EventQueueOptions<T> = {}): EventQueue<T> {
  const maxSize = options.maxSize ?? Number.POSITIVE_INFINITY;
  const sizeOf = options.sizeOf ?? (() => 1);
  let size = 0;
  // A ring of the waiting values, its length a power of two: it doubles when full and never shrinks, so taking
  // and adding values allocates nothing once it has grown to the most that waited (listen takes a value per block).
  let ring: (T | undefined)[] = new Array<T | undefined>(16).fill(undefined);
  let head = 0;
  let count = 0;
  let ended = false;
  let failure: { error: unknown } | null = null;
  let waiting: { resolve: (value: T | null) => void; reject: (error: unknown) => void } | null = null;
  let subscription: Subscription | null = null;

  function wake(): void {
    if (waiting === null) return;
    const waiter = waiting;
    if (count > 0) {
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
    const item = ring[head]!;
    // Drop the queue's reference now: a chunk taken must not stay in memory until its slot is used again.
    ring[head] = undefined;
    head = (head + 1) & (ring.length - 1);
    count--;
    size -= sizeOf(item);
    return item;
  }

  function add(item: T): void {
    if (count === ring.length) {
      const grown = new Array<T | undefined>(2 * ring.length).fill(undefined);
      for (let i = 0; i < count; i++) grown[i] = ring[(head + i) & (ring.length - 1)];
      ring = grown;
      head = 0;
    }
    ring[(head + count) & (ring.length - 1)] = item;
    count++;
  }

  function stop(): void {
    ended = true;
    subscription?.unsubscribe();
    subscription = null;
    wake();
  }

  subscription = observable.subscribe({
    next(value) {
      if (ended) return;
      const valueSize = sizeOf(value);
      if (size + valueSize > maxSize) {
        stop();
        options.onOverflow?.();
        return;
      }
      size += valueSize;
      add(value);
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
      if (count > 0) return Promise.resolve(take());
      if (failure !== null) return Promise.reject(failure.error);
      if (ended) return Promise.resolve(null);
      return new Promise<T | null>((resolve, reject) => {
        waiting = { resolve, reject };
      });
    },
    poll() {
      return count > 0 ? take() : undefined;
    },
    peek() {
      return count > 0 ? ring[head] : undefined;
    },
    stop,
    get length() {
      return count;
    },
    get size() {
      return size;
    },
  };
}
