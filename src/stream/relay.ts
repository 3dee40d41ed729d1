// A Subject for the paths a block's readings take (listen's input, the shared chain of a live link): the same
// deliveries as rxjs's Subject, without what its next allocates in the CommonJS build Node loads (a closure and an
// array iterator per value, a few hundred bytes a block of a live link).
import { Observable, type Observer, type Subscriber } from 'rxjs';

/** An Observable whose values, error and completion are pushed in by hand, to every subscriber at that time. */
export interface Relay<T> extends Observable<T>, Observer<T> {}

/**
 * A relay with no subscribers yet; it delivers as rxjs's Subject does. A value goes to the subscribers there when it
 * is pushed, in the order they subscribed (one subscribing during the delivery gets the next value, one leaving gets
 * none it has not yet been handed); after an error or completion nothing more is delivered, and a late subscriber
 * gets that end at once.
 */
export function createRelay<T>(): Relay<T> {
  // Replaced, never changed, when a subscriber comes or goes: a delivery goes on over the list it started with.
  let subscribers: readonly Subscriber<T>[] = [];
  let stopped = false;
  let failure: { error: unknown } | null = null;
  const relay = new Observable<T>((subscriber) => {
    if (failure !== null) subscriber.error(failure.error);
    else if (stopped) subscriber.complete();
    else {
      subscribers = [...subscribers, subscriber];
      return () => {
        subscribers = subscribers.filter((other) => other !== subscriber);
      };
    }
    return undefined;
  }) as Relay<T>;
  relay.next = (value: T): void => {
    if (stopped) return;
    const now = subscribers;
    for (let i = 0; i < now.length; i++) now[i]!.next(value);
  };
  relay.error = (error: unknown): void => {
    if (stopped) return;
    stopped = true;
    failure = { error };
    const now = subscribers;
    subscribers = [];
    for (let i = 0; i < now.length; i++) now[i]!.error(error);
  };
  relay.complete = (): void => {
    if (stopped) return;
    stopped = true;
    const now = subscribers;
    subscribers = [];
    for (let i = 0; i < now.length; i++) now[i]!.complete();
  };
  return relay;
}
