// The byte-source interface the io layer reads from: chunks of bytes interleaved with link state changes.
// Hardware (serialport) is one implementation; a manual double for tests is another.

import type { Observable } from 'rxjs';

/**
 * A change of the link state. Emitted when the state changes, and again while down whenever the cause
 * changes (e.g. `disconnected`, then `open failed: … No such file or directory`, then `open failed: … EACCES`);
 * never repeated for the same cause.
 */
export interface LinkEvent {
  readonly kind: 'link';
  readonly state: 'up' | 'down';
  /** Wall-clock time of the change, ms since the Unix epoch. */
  readonly timeMs: number;
  /** Why: `opened`, `disconnected`, `closed`, `error: …`, `open failed: …`. */
  readonly reason: string;
  /**
   * On `up`: true when the link had been up before, so bytes were lost between the last chunk before the
   * outage and the first chunk after it; the consumer marks an input gap there. Always false on `down`.
   */
  readonly gap: boolean;
  /** On `up`: failed open attempts before this success. On `down`: failed attempts so far in this outage. */
  readonly attempt: number;
}

export type ByteSourceEvent = Uint8Array | LinkEvent;

export interface ByteSource {
  /** For messages, e.g. `/dev/ttyUSB0 @ 921600 Bd`. */
  readonly name: string;
  /**
   * Cold: each subscription opens the link and unsubscribing closes it. Emits byte chunks (treat them as
   * read-only) and LinkEvents. Errors only when the source gives up; completes when it ends for good.
   */
  open(): Observable<ByteSourceEvent>;
}

export function isLinkEvent(event: ByteSourceEvent): event is LinkEvent {
  return !(event instanceof Uint8Array);
}
