// The feed's contracts at its edges, with real WebSocket clients over loopback: re-subscribing keeps continuity
// and every alarm event; updates carry their time base; the server listens before its source exists; and each
// limit a hostile or broken client can hit (message rate, unread output, idle connections, dead peers,
// connections per address, origins behind a proxy) holds, with the counts and server memory measured here.
// Check values: the limits are the options each test sets; the overspeed threshold is a quarter fringe per
// sample (docs/signal-chain.md, common practice for quadrature counting).
import { afterEach, describe, expect, it } from 'vitest';
import { createAxes } from '../../src/stream/index.js';
import { startFeedServer, type FeedServer, type FeedServerOptions, type FeedUpdateMessage } from '../../src/io/feed/index.js';
import { axisOptions, METRES_PER_FRINGE } from '../stream/signal.js';
import { createMotion, openClient, type TestClient } from './support.js';

const TOKEN = 'limits-test-token-0123456789';
let server: FeedServer | null = null;
const clients: TestClient[] = [];

afterEach(async () => {
  for (const client of clients.splice(0)) client.socket.terminate();
  await server?.close();
  server = null;
});

async function start(extra: Partial<FeedServerOptions> = {}) {
  const motion = createMotion();
  const axes = createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }] });
  server = await startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, maxUpdateHz: 200, ...extra });
  return { motion, server };
}

async function client(url: string, headers?: Record<string, string>, options?: { autoPong?: boolean }): Promise<TestClient> {
  const opened = await openClient(url, headers, options);
  clients.push(opened);
  return opened;
}

const isUpdate = (atLeast: number) => (m: Record<string, unknown>) => m.type === 'update' && (m.sampleIndex as number) >= atLeast;

async function until(condition: () => boolean, what: string): Promise<void> {
  for (let wait = 0; wait < 2000; wait++) {
    if (condition()) return;
    await new Promise((resolve) => setTimeout(resolve, 10));
  }
  throw new Error(`never happened: ${what}`);
}

describe('feed contracts', () => {
  it('keeps continuity and delivers every alarm event when a client re-subscribes after each burst', async () => {
    const { motion, server } = await start();
    const c = await client(server.feedUrl);
    const updates: FeedUpdateMessage[] = [];
    c.socket.on('message', (data) => {
      const message = JSON.parse(data.toString()) as FeedUpdateMessage;
      if (message.type === 'update') updates.push(message);
    });
    c.send({ type: 'subscribe', updateHz: 50 });
    await c.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(1, 1000);
    const rates = [20, 100, 35, 200, 50];
    for (const updateHz of rates) {
      // 0.3 fringe per sample is beyond the overspeed threshold; the hold that follows clears it.
      motion.move(30, 100);
      motion.move(0, 1000);
      c.send({ type: 'subscribe', updateHz });
      await c.next((m) => m.type === 'subscribed' && m.updateHz === updateHz, `subscribed at ${updateHz} Hz`);
    }
    motion.move(0, 1000);
    const last = motion.sampleCount - 1;
    await c.next(isUpdate(last), 'the last update');
    // Every update continues exactly where the one before ended: no span lost across five re-subscribes.
    for (let k = 1; k < updates.length; k++) {
      expect(updates[k]!.sampleIndex - updates[k]!.axes[0]!.samples).toBe(updates[k - 1]!.sampleIndex);
    }
    expect(updates.map((update) => update.seq)).toEqual(updates.map((_, k) => k + 1));
    const events = updates.flatMap((update) => update.axes[0]!.events);
    const raised = events.filter((event) => event.kind === 'overspeed' && event.state === 'raised');
    expect(raised).toHaveLength(rates.length);
    for (const event of raised) expect(event.unit).toBe('rad/sample');
    // 30 fringes over 100 samples: 0.3 fringe = 0.6π rad per sample.
    expect(raised[0]!.value).toBeCloseTo(0.6 * Math.PI, 6);
    expect(events.filter((event) => event.kind === 'overspeed' && event.state === 'cleared')).toHaveLength(rates.length);
    expect(updates.every((update) => update.axes[0]!.eventsDropped === 0)).toBe(true);
  });

  it('carries the time base: sample rate, sample time of the update and wall-clock time', async () => {
    const { motion, server } = await start();
    const c = await client(server.feedUrl);
    const before = Date.now();
    c.send({ type: 'subscribe', updateHz: 50 });
    motion.move(2, 2500);
    const update = await c.next<FeedUpdateMessage>(isUpdate(2499), 'update');
    const after = Date.now();
    expect(update.rateHz).toBe(1e6);
    expect(update.sampleTimeS).toBe(update.sampleIndex / 1e6);
    expect(update.time).toMatch(/^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z$/);
    expect(Date.parse(update.time)).toBeGreaterThanOrEqual(before);
    expect(Date.parse(update.time)).toBeLessThanOrEqual(after);
  });

  it('listens before the measurement starts: state waiting, then live and updates once a source is attached', async () => {
    server = await startFeedServer({ maxUpdateHz: 200 });
    expect(server.state).toBe('waiting');
    const c = await client(server.feedUrl);
    expect(await c.next((m) => m.type === 'hello', 'hello')).toMatchObject({ state: 'waiting', axes: [] });
    expect(await c.next((m) => m.type === 'status', 'status')).toMatchObject({ state: 'waiting', axes: [], rateHz: null, sampleTimeS: null });
    c.send({ type: 'subscribe', updateHz: 50 });
    await c.next((m) => m.type === 'subscribed', 'subscribed');
    const motion = createMotion();
    server.attach({ axes: createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }] }), rateHz: axisOptions.rateHz });
    expect(await c.next((m) => m.type === 'status', 'status live')).toMatchObject({ state: 'live', axes: ['X'], rateHz: 1e6 });
    motion.move(1.5, 1000);
    const update = await c.next<FeedUpdateMessage>(isUpdate(999), 'update after attach');
    expect(update.axes[0]!.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
    motion.source.complete();
    // The status carries the time base of the latest sample (index 999 at 1 MHz).
    expect(await c.next((m) => m.type === 'status', 'status ended')).toMatchObject({ state: 'ended', rateHz: 1e6, sampleTimeS: 999 / 1e6 });
    await c.next((m) => m.type === 'end', 'end');
    expect((await c.closed).code).toBe(1000);
    // A client arriving after the end learns it at once and is closed normally.
    const late = await client(server.feedUrl);
    expect(await late.next((m) => m.type === 'hello', 'hello')).toMatchObject({ state: 'ended' });
    expect((await late.closed).code).toBe(1000);
  });

  it('closes a client that sends faster than the message rate limit (1008) and keeps serving a good one', async () => {
    const { motion, server } = await start({ maxMessagesPerS: 10, messageBurst: 20 });
    const good = await client(server.feedUrl);
    good.send({ type: 'subscribe', updateHz: 10 });
    await good.next((m) => m.type === 'subscribed', 'subscribed');
    const flood = await client(server.feedUrl);
    for (let k = 0; k < 500; k++) flood.send({ type: 'subscribe', updateHz: 100, trace: true });
    expect(await flood.closed).toEqual({ code: 1008, reason: 'more than 10 messages per second (burst 20)' });
    expect(server.counts.closedRate).toBe(1);
    motion.move(1, 1000);
    await good.next(isUpdate(999), 'update for the good client');
  });

  it('closes a client whose unread replies pass the output limit; server memory stays bounded', async () => {
    const { motion, server } = await start({ maxBufferedBytes: 65536, maxMessagesPerS: 1e9, messageBurst: 10_000 });
    const good = await client(server.feedUrl);
    good.send({ type: 'subscribe', updateHz: 10 });
    await good.next((m) => m.type === 'subscribed', 'subscribed');
    const flood = await client(server.feedUrl);
    (flood.socket as unknown as { _socket: { pause(): void } })._socket.pause();
    global.gc?.();
    const heapBefore = process.memoryUsage().heapUsed;
    let sent = 0;
    let closed = false;
    void flood.closed.then(() => (closed = true));
    // Malformed text frames, each answered by an error reply that the paused client never reads.
    while (!closed && sent < 2_000_000) {
      for (let k = 0; k < 2000; k++) flood.send('{"type": "subscribe", ');
      sent += 2000;
      await new Promise((resolve) => setTimeout(resolve, 1));
    }
    await until(() => server.counts.closedOutput === 1, 'the flooding client closed for its output');
    global.gc?.();
    const heapAfter = process.memoryUsage().heapUsed;
    console.info(
      `output flood: ${sent} malformed messages sent before the close; server heap ${(heapBefore / 2 ** 20).toFixed(1)} → ${(heapAfter / 2 ** 20).toFixed(1)} MiB`,
    );
    expect(server.counts.closedOutput).toBe(1);
    // Before the limits, a flood like this grew the server by hundreds of MiB (issue 12).
    expect(heapAfter - heapBefore).toBeLessThan(64 * 2 ** 20);
    motion.move(1, 1000);
    await good.next(isUpdate(999), 'update for the good client');
    expect(server.clientCount).toBe(1);
  });

  it('closes connections that do not subscribe in time, so idle ones cannot hold every slot', async () => {
    const { motion, server } = await start({ maxClients: 4, subscribeTimeoutMs: 300 });
    const idle = await Promise.all([1, 2, 3, 4].map(() => client(server.feedUrl)));
    await expect(openClient(server.feedUrl)).rejects.toMatchObject({ status: 503, body: 'too many clients (max 4)' });
    for (const c of idle) expect(await c.closed).toEqual({ code: 1008, reason: 'no subscribe within 300 ms' });
    expect(server.counts).toMatchObject({ refusedFull: 1, closedIdle: 4 });
    await until(() => server.clientCount === 0, 'slots freed');
    const fresh = await client(server.feedUrl);
    fresh.send({ type: 'subscribe' });
    motion.move(1, 1000);
    await fresh.next(isUpdate(999), 'update for a client after the idle ones left');
  });

  it('drops a peer that answers no ping, and keeps one that does', async () => {
    const { motion, server } = await start({ pingIntervalMs: 100 });
    const dead = await client(server.feedUrl, {}, { autoPong: false });
    dead.send({ type: 'subscribe', updateHz: 10 });
    const alive = await client(server.feedUrl);
    alive.send({ type: 'subscribe', updateHz: 10 });
    await alive.next((m) => m.type === 'subscribed', 'subscribed');
    expect((await dead.closed).code).toBe(1006);
    expect(server.counts.closedDead).toBe(1);
    motion.move(1, 1000);
    await alive.next(isUpdate(999), 'update for the live client');
    expect(server.clientCount).toBe(1);
  });

  it('limits connections per address with HTTP 429', async () => {
    const { server } = await start({ maxClientsPerAddress: 2 });
    await client(server.feedUrl);
    await client(server.feedUrl);
    await expect(openClient(server.feedUrl)).rejects.toMatchObject({ status: 429, body: 'too many connections from 127.0.0.1 (max 2)' });
    expect(server.counts.refusedPerAddress).toBe(1);
  });

  it('accepts the declared origins, and https://<Host> only through a declared proxy', async () => {
    const { server } = await start({ token: TOKEN, allowedOrigins: ['https://hmi.example'] });
    await (await client(server.feedUrl, { Origin: 'https://hmi.example' })).next((m) => m.type === 'hello', 'hello');
    // Not through a proxy: an https page at the feed's own host is another origin, and a public Host is refused.
    const own = new URL(server.feedUrl).host;
    await expect(openClient(server.feedUrl, { Origin: `https://${own}` })).rejects.toMatchObject({ status: 403 });
    await expect(openClient(server.feedUrl, { Host: 'feed.lab.example', Origin: 'https://feed.lab.example' })).rejects.toMatchObject({ status: 403 });
    await server.close();

    // Through a reverse proxy on this machine that passes the public Host on (as the docs' example does).
    const { server: proxied } = await start({ token: TOKEN, trustedProxies: ['127.0.0.1'] });
    const c = await client(proxied.feedUrl, { Host: 'feed.lab.example', Origin: 'https://feed.lab.example' });
    await c.next((m) => m.type === 'hello', 'hello');
    await expect(openClient(proxied.feedUrl, { Host: 'feed.lab.example', Origin: 'https://evil.example' })).rejects.toMatchObject({ status: 403 });
    await expect(openClient(proxied.feedUrl.replace(/\?.*$/, ''), { Host: 'feed.lab.example' })).rejects.toMatchObject({ status: 401 });
    const axes = createAxes(createMotion().source, { axes: [axisOptions] });
    await expect(startFeedServer({ source: { axes, rateHz: 1e6 }, trustedProxies: ['127.0.0.1'] })).rejects.toThrow(
      'token must be set when trustedProxies are given (a reverse proxy makes the feed reachable from the network) (got undefined)',
    );
  });

  it('never shows the token in the URL meant for display', async () => {
    const { server } = await start({ token: TOKEN });
    expect(server.pageUrl).toContain(TOKEN);
    expect(server.pageUrlForDisplay).toBe(`http://127.0.0.1:${server.port}/?token=<token>`);
  });
});
