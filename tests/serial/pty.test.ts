// The serial byte source over real pseudo-terminal pairs (socat): data flow, device vanishing and returning.
import { closeSync, mkdtempSync, openSync, rmSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Subscription } from 'rxjs';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createSerialByteSource, isLinkEvent, type ByteSourceEvent, type LinkEvent } from '../../src/io/serial/index.js';
import type { InputGap } from '../../src/io/wire/index.js';
import { collectingDecoder } from '../wire/collect.js';
import { concat, syntheticFrame } from '../wire/frames.js';
import { requireSocat, startPtyPair, type PtyPair } from './socat.js';
import { until } from './wait.js';

let dir = '';
const pairs: PtyPair[] = [];
const writers: number[] = [];
let subscription: Subscription | null = null;

beforeAll(() => {
  requireSocat();
});

afterEach(async () => {
  subscription?.unsubscribe();
  subscription = null;
  for (const fd of writers.splice(0)) closeSync(fd);
  await Promise.all(pairs.splice(0).map((pair) => pair.stop()));
  if (dir !== '') rmSync(dir, { recursive: true, force: true });
  dir = '';
});

async function pair(): Promise<{ reader: string; writer: string }> {
  if (dir === '') dir = mkdtempSync(join(tmpdir(), 'fringetally-pty-'));
  const reader = join(dir, 'device');
  const writer = join(dir, 'firmware');
  pairs.push(await startPtyPair(reader, writer));
  return { reader, writer };
}

function openWriter(path: string): number {
  const fd = openSync(path, 'w');
  writers.push(fd);
  return fd;
}

function closeWriter(fd: number): void {
  writers.splice(writers.indexOf(fd), 1);
  closeSync(fd);
}

describe('serial byte source over socat pseudo-terminals', () => {
  it('delivers the bytes written to the other end of the pair', async () => {
    const { reader, writer } = await pair();
    const source = createSerialByteSource({ path: reader, baudRate: 115200, retryDelayMs: 20, maxRetryDelayMs: 100 });
    const events: ByteSourceEvent[] = [];
    subscription = source.open().subscribe({ next: (e) => events.push(e) });
    await until(() => events.some(isLinkEvent), 'link up');
    const fd = openWriter(writer);
    const payload = Uint8Array.from({ length: 5000 }, (_, i) => (i * 7 + 3) & 0xff);
    writeSync(fd, payload);
    const received = () => Buffer.concat(events.filter((e): e is Uint8Array => !isLinkEvent(e)));
    await until(() => received().length >= payload.length, 'all bytes');
    expect(received().equals(Buffer.from(payload))).toBe(true);
    expect((events[0] as LinkEvent).state).toBe('up');
  });

  it('reports link down when socat vanishes, link up with a gap when it returns, and the decoder counts the lost frames', async () => {
    const { reader, writer } = await pair();
    const source = createSerialByteSource({ path: reader, baudRate: 115200, retryDelayMs: 20, maxRetryDelayMs: 100 });
    const links: LinkEvent[] = [];
    const decoded = collectingDecoder();
    const gaps: InputGap[] = decoded.gaps;
    let flushed = 0;
    subscription = source.open().subscribe({
      next: (event) => {
        if (!isLinkEvent(event)) {
          decoded.decoder.push(event);
          return;
        }
        links.push(event);
        if (event.state === 'down') flushed += decoded.decoder.flushPartial();
      },
    });
    await until(() => links.length === 1, 'first link up');

    let fd = openWriter(writer);
    const cutFrame = syntheticFrame(2);
    const before = concat([syntheticFrame(0), syntheticFrame(1), cutFrame.subarray(0, 11)]);
    writeSync(fd, before);
    await until(() => decoded.frames.length === 2 && decoded.decoder.counters.bytesIn === before.length, 'first frames and a partial one');

    closeWriter(fd);
    await pairs.pop()!.stop();
    await until(() => links.length === 2, 'link down');
    // Either serialport's own close (`disconnected`) or the vanish watchdog (`vanished`, it polls every 100 ms)
    // sees the device go first; which one wins depends on scheduling, and both tell the truth.
    expect(links[1]).toMatchObject({ state: 'down', gap: false });
    expect(['disconnected', 'vanished']).toContain(links[1]!.reason);
    expect(flushed).toBe(11);
    // With the pty gone, reopening fails at once; the source reports the new cause and keeps retrying.
    await until(() => links.length === 3, 'failed reopen reported');
    expect(links[2]!.reason).toMatch(/^open failed: .*No such file or directory/);

    pairs.push(await startPtyPair(reader, writer));
    await until(() => links.at(-1)!.state === 'up', 'link up again');
    // While socat was gone, further down events may tell the changed cause (the device node missing).
    const outage = links.slice(1, -1);
    expect(outage.every((e) => e.state === 'down' && !e.gap)).toBe(true);
    expect(outage.slice(1).every((e) => e.reason.startsWith('open failed: '))).toBe(true);
    expect(links.at(-1)).toMatchObject({ state: 'up', reason: 'opened', gap: true });

    fd = openWriter(writer);
    writeSync(fd, concat([syntheticFrame(5), syntheticFrame(6)]));
    await until(() => decoded.frames.length === 4, 'frames after reconnection');
    expect(decoded.frames.map((f) => f.sequence)).toEqual([0, 1, 5, 6]);
    // Indices count the lost samples (docs/wire-format.md): frame 5 starts at 8 delivered + 12 lost.
    expect(gaps).toEqual([{ sampleIndex: 20, kind: 'loss', lostFrames: 3, lostSamples: 12, expectedSequence: 2, receivedSequence: 5 }]);
    expect(decoded.decoder.counters.crcFailures).toBe(0);
  });
});
