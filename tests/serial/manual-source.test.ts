import { describe, expect, it } from 'vitest';
import { createManualByteSource, isLinkEvent, type ByteSourceEvent } from '../../src/io/serial/index.js';
import { requireSocat } from './socat.js';

describe('manual byte source (test double)', () => {
  it('broadcasts chunks and link changes to open subscriptions and marks the gap after an outage', () => {
    const source = createManualByteSource('bench double');
    const events: ByteSourceEvent[] = [];
    const subscription = source.open().subscribe({ next: (e) => events.push(e) });
    expect(source.openCount).toBe(1);
    source.linkUp();
    source.write(Uint8Array.of(1, 2));
    source.linkDown();
    source.linkUp();
    expect(events.map((e) => (isLinkEvent(e) ? `${e.state}:${e.gap}` : Array.from(e).join(',')))).toEqual([
      'up:false',
      '1,2',
      'down:false',
      'up:true',
    ]);
    subscription.unsubscribe();
    expect(source.openCount).toBe(0);
    expect(source.name).toBe('bench double');
  });

  it('passes errors and completion to subscribers', () => {
    const source = createManualByteSource();
    const seen: string[] = [];
    source.open().subscribe({ error: (e: Error) => seen.push(`error ${e.message}`) });
    source.fail(new Error('cable cut'));
    source.open().subscribe({ complete: () => seen.push('complete') });
    source.end();
    expect(seen).toEqual(['error cable cut', 'complete']);
    expect(source.openCount).toBe(0);
  });
});

describe('socat requirement', () => {
  it('fails with an install hint when socat is not on PATH', () => {
    const path = process.env['PATH'];
    process.env['PATH'] = '/nonexistent-fringetally-path';
    try {
      expect(() => requireSocat()).toThrow('socat is missing: these tests need real pseudo-terminals; install it with `apt-get install -y socat`');
    } finally {
      process.env['PATH'] = path;
    }
  });
});
