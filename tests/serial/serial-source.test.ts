// The serial byte source over serialport's own mock binding (reached through SerialPortMock, see ECOSYSTEM.md).
import { SerialPortMock } from 'serialport';
import type { Subscription } from 'rxjs';
import { afterEach, describe, expect, it } from 'vitest';
import { OptionError } from '../../src/core/options.js';
import {
  createSerialByteSource,
  isLinkEvent,
  resolveSerialSourceOptions,
  retryDelayFor,
  type ByteSourceEvent,
  type LinkEvent,
  type SerialSourceOptions,
} from '../../src/io/serial/index.js';
import { until } from './wait.js';

const PATH = '/dev/fringetally-mock0';

function harness(options: Partial<SerialSourceOptions> = {}) {
  const ports: SerialPortMock[] = [];
  const source = createSerialByteSource({
    path: PATH,
    baudRate: 115200,
    retryDelayMs: 2,
    maxRetryDelayMs: 10,
    ...options,
    openPort: ({ path, baudRate }) => {
      const port = new SerialPortMock({ path, baudRate, autoOpen: false });
      ports.push(port);
      return port;
    },
  });
  const events: ByteSourceEvent[] = [];
  let error: Error | null = null;
  let completed = false;
  const subscription: Subscription = source.open().subscribe({
    next: (event) => events.push(event),
    error: (e: Error) => (error = e),
    complete: () => (completed = true),
  });
  subscriptions.push(subscription);
  const links = () => events.filter(isLinkEvent) as LinkEvent[];
  const bytes = () => Buffer.concat(events.filter((e): e is Uint8Array => !isLinkEvent(e))).toString('latin1');
  return { source, ports, events, links, bytes, subscription, error: () => error, completed: () => completed };
}

const subscriptions: Subscription[] = [];
afterEach(() => {
  for (const subscription of subscriptions.splice(0)) subscription.unsubscribe();
  SerialPortMock.binding.reset();
});

describe('serial source options', () => {
  it.each([
    [{ path: '' }, 'path must be a non-empty string (got "")'],
    [{ path: PATH, baudRate: 0 }, 'baudRate must be an integer in 1..20000000 (got 0)'],
    [{ path: PATH, retryDelayMs: -1 }, 'retryDelayMs must be a number in [1, 600000] (got -1)'],
    [{ path: PATH, retryDelayMs: 100, maxRetryDelayMs: 50 }, 'maxRetryDelayMs must be a number in [100, 600000] (got 50)'],
    [{ path: PATH, backoffFactor: 0.5 }, 'backoffFactor must be a number in [1, 10] (got 0.5)'],
    [{ path: PATH, maxRetries: -2 }, 'maxRetries must be an integer >= 0 or Infinity (got -2)'],
  ])('rejects %o', (options, message) => {
    expect(() => resolveSerialSourceOptions(options)).toThrow(message);
    expect(() => resolveSerialSourceOptions(options)).toThrow(OptionError);
  });

  it('fills defaults and grows the retry delay geometrically up to the ceiling', () => {
    const config = resolveSerialSourceOptions({ path: PATH });
    expect(config).toEqual({ path: PATH, baudRate: 921600, retryDelayMs: 200, maxRetryDelayMs: 5000, backoffFactor: 2, maxRetries: Infinity, maxRetriesBeforeFirstOpen: Infinity });
    expect([1, 2, 3, 4, 5, 6, 7].map((attempt) => retryDelayFor(config, attempt))).toEqual([200, 400, 800, 1600, 3200, 5000, 5000]);
  });
});

describe('serial source over the mock binding', () => {
  it('opens the port, reports link up, delivers chunks, closes on unsubscribe', async () => {
    SerialPortMock.binding.createPort(PATH);
    const h = harness();
    await until(() => h.links().length === 1, 'link up');
    expect(h.links()[0]).toMatchObject({ kind: 'link', state: 'up', reason: 'opened', gap: false, attempt: 0 });
    expect(h.source.name).toBe(`${PATH} @ 115200 Bd`);
    h.ports[0]!.port!.emitData(Buffer.from('abc'));
    h.ports[0]!.port!.emitData(Buffer.from('def'));
    await until(() => h.bytes() === 'abcdef', 'data');
    h.subscription.unsubscribe();
    await until(() => !h.ports[0]!.isOpen, 'port closed');
    expect(h.completed()).toBe(false);
  });

  it('waits for a missing device with backoff: one link-down, then link up once it exists', async () => {
    const h = harness();
    await until(() => h.ports.length >= 3, 'three open attempts');
    expect(h.links()).toHaveLength(1);
    expect(h.links()[0]).toMatchObject({ state: 'down', gap: false, attempt: 1 });
    expect(h.links()[0]!.reason).toMatch(/^open failed: .*does not exist/);
    SerialPortMock.binding.createPort(PATH);
    await until(() => h.links().length === 2, 'link up');
    const up = h.links()[1]!;
    expect(up).toMatchObject({ state: 'up', gap: false });
    expect(up.attempt).toBeGreaterThanOrEqual(3);
  });

  it('reports a disconnect as link down, reconnects and marks the gap on link up', async () => {
    SerialPortMock.binding.createPort(PATH);
    const h = harness();
    await until(() => h.links().length === 1, 'first link up');
    h.ports[0]!.port!.emitData(Buffer.from('before'));
    await until(() => h.bytes() === 'before', 'data before');
    const disconnect = Object.assign(new Error('device vanished'), { disconnected: true });
    h.ports[0]!._disconnected(disconnect);
    await until(() => h.links().length === 3, 'down and up again');
    expect(h.links().map((e) => [e.state, e.reason, e.gap])).toEqual([
      ['up', 'opened', false],
      ['down', 'disconnected', false],
      ['up', 'opened', true],
    ]);
    h.ports.at(-1)!.port!.emitData(Buffer.from('after'));
    await until(() => h.bytes() === 'beforeafter', 'data after');
    // The link events sit between the bytes of both sides, where the consumer marks the gap.
    const kinds = h.events.map((e) => (isLinkEvent(e) ? e.state : 'bytes'));
    expect(kinds).toEqual(['up', 'bytes', 'down', 'up', 'bytes']);
  });

  it('gives up with an error naming the attempts after maxRetries failures', async () => {
    const h = harness({ maxRetries: 2 });
    await until(() => h.error() !== null, 'error');
    expect(h.error()!.message).toMatch(new RegExp(`^${PATH} @ 115200 Bd: gave up after 3 failed open attempts \\(it never opened: check the path\\); last error: .*does not exist`));
    expect(h.ports).toHaveLength(3);
  });

  it('gives up on a port that never opened after maxRetriesBeforeFirstOpen failures, however many maxRetries allows', async () => {
    const h = harness({ maxRetries: Infinity, maxRetriesBeforeFirstOpen: 1, retryDelayMs: 1 });
    await until(() => h.error() !== null, 'error');
    expect(h.error()!.message).toContain('gave up after 2 failed open attempts (it never opened: check the path)');
    expect(h.ports).toHaveLength(2);
  });

  it('stops retrying once unsubscribed', async () => {
    const h = harness({ retryDelayMs: 20, maxRetryDelayMs: 20 });
    await until(() => h.ports.length === 1 && h.links().length === 1, 'first failure');
    h.subscription.unsubscribe();
    SerialPortMock.binding.createPort(PATH);
    await new Promise((resolve) => setTimeout(resolve, 80));
    expect(h.ports).toHaveLength(1);
  });

  it('closes a port whose open completes after unsubscribe', async () => {
    SerialPortMock.binding.createPort(PATH);
    const h = harness();
    h.subscription.unsubscribe();
    const port = h.ports[0]!;
    await until(() => port.isOpen === false && port.opening === false, 'port settled');
    expect(h.links()).toEqual([]);
  });

  it('reports a port that throws on construction as a failed open', async () => {
    const source = createSerialByteSource({
      path: PATH,
      maxRetries: 0,
      openPort: () => {
        throw new Error('bad settings');
      },
    });
    const events: ByteSourceEvent[] = [];
    let error: Error | null = null;
    subscriptions.push(source.open().subscribe({ next: (e) => events.push(e), error: (e: Error) => (error = e) }));
    await until(() => error !== null, 'error');
    expect((events[0] as LinkEvent).reason).toBe('open failed: bad settings');
    expect(error!.message).toContain('gave up after 1 failed open attempts (it never opened: check the path); last error: bad settings');
  });
});
