// A byte source driven by hand: tests and emulators push chunks and link changes into every open subscription.

import { Observable, type Subscriber } from 'rxjs';
import type { ByteSource, ByteSourceEvent } from './byte-source.js';

export interface ManualByteSource extends ByteSource {
  /** Subscriptions open now. */
  readonly openCount: number;
  /** Delivers one chunk to every open subscription. */
  write(chunk: Uint8Array): void;
  /** Reports the link up; `gap` is true when it had been up before (as the serial source does). */
  linkUp(reason?: string): void;
  linkDown(reason?: string): void;
  /** Ends every subscription with this error. */
  fail(error: Error): void;
  /** Completes every subscription. */
  end(): void;
}

function deliver(this: ByteSourceEvent, subscriber: Subscriber<ByteSourceEvent>): void {
  subscriber.next(this);
}

export function createManualByteSource(name = 'manual byte source'): ManualByteSource {
  const subscribers = new Set<Subscriber<ByteSourceEvent>>();
  let everUp = false;

  // forEach with the event as `this`: it visits the set as for-of does, without an iterator and its results per
  // chunk (the bench's chunks come from here).
  function broadcast(event: ByteSourceEvent): void {
    subscribers.forEach(deliver, event);
  }

  return {
    name,
    get openCount() {
      return subscribers.size;
    },
    open() {
      return new Observable<ByteSourceEvent>((subscriber) => {
        subscribers.add(subscriber);
        return () => subscribers.delete(subscriber);
      });
    },
    write(chunk) {
      broadcast(chunk);
    },
    linkUp(reason = 'opened') {
      broadcast({ kind: 'link', state: 'up', timeMs: Date.now(), reason, gap: everUp, attempt: 0 });
      everUp = true;
    },
    linkDown(reason = 'disconnected') {
      broadcast({ kind: 'link', state: 'down', timeMs: Date.now(), reason, gap: false, attempt: 0 });
    },
    fail(error) {
      for (const subscriber of [...subscribers]) subscriber.error(error);
    },
    end() {
      for (const subscriber of [...subscribers]) subscriber.complete();
    },
  };
}
