// The WebSocket feed with real clients over loopback: schema, subscribe, read-only refusals, size limit,
// token, origin and host checks, resume after reconnect, end of source.
// Check values: displacement per fringe λ/(N·n), λ = 632.9908 nm, N = 2 (CIPM 2007, published; common practice).
import { afterEach, describe, expect, it } from 'vitest';
import { request } from 'node:http';
import { createAxes } from '../../src/stream/index.js';
import { startFeedServer, type FeedServer, type FeedUpdateMessage } from '../../src/io/feed/index.js';
import { axisOptions, METRES_PER_FRINGE } from '../stream/signal.js';
import { createMotion, openClient, type TestClient } from './support.js';

const TOKEN = 'test-token-0123456789';
let server: FeedServer | null = null;
const clients: TestClient[] = [];

afterEach(async () => {
  for (const client of clients.splice(0)) client.socket.terminate();
  await server?.close();
  server = null;
});

async function start(extra: Partial<Parameters<typeof startFeedServer>[0]> = {}) {
  const motion = createMotion();
  const axes = createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }] });
  server = await startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, maxUpdateHz: 200, ...extra });
  return { motion, server };
}

async function client(url: string, headers?: Record<string, string>): Promise<TestClient> {
  const opened = await openClient(url, headers);
  clients.push(opened);
  return opened;
}

const isUpdate = (atLeast: number) => (m: Record<string, unknown>) => m.type === 'update' && (m.sampleIndex as number) >= atLeast;

function get(url: string, headers: Record<string, string> = {}): Promise<{ status: number; headers: Record<string, unknown>; body: string }> {
  return new Promise((resolve, reject) => {
    request(url, { headers }, (response) => {
      let body = '';
      response.on('data', (chunk: Buffer) => (body += chunk.toString()));
      response.on('end', () => resolve({ status: response.statusCode ?? 0, headers: response.headers, body }));
    })
      .on('error', reject)
      .end();
  });
}

describe('WebSocket feed', () => {
  it('binds to loopback, greets, and sends updates in the documented schema at the chosen rate', async () => {
    const { motion, server } = await start();
    expect(server.host).toBe('127.0.0.1');
    expect(server.feedUrl).toMatch(/^ws:\/\/127\.0\.0\.1:\d+\/feed$/);
    const c = await client(server.feedUrl);
    const hello = await c.next((m) => m.type === 'hello', 'hello');
    expect(hello).toEqual({
      type: 'hello', schema: 1, readOnly: true, state: 'live', axes: ['X'], updateHz: { default: 10, max: 200 }, maxMessageBytes: 1024,
      maxMessagesPerS: 10, messageBurst: 20, subscribeTimeoutMs: 10000,
    });
    c.send({ type: 'subscribe', updateHz: 100 });
    await c.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(2.5, 1000);
    const update = await c.next<FeedUpdateMessage>(isUpdate(999), 'update at sample 999');
    expect(update.schema).toBe(1);
    expect(update.seq).toBeGreaterThanOrEqual(1);
    const axis = update.axes[0]!;
    expect(Object.keys(axis).sort()).toEqual(
      ['alarms', 'alarmsSeen', 'countLost', 'events', 'eventsDropped', 'level', 'levelMin', 'name', 'positionM', 'positionMaxM', 'positionMinM', 'samples', 'sampleIndex', 'velocityMS', 'velocityMaxMS', 'velocityMinMS'].sort(),
    );
    expect(axis.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
    expect(axis.level).toBeCloseTo(1, 5);
    expect(axis.alarms).toEqual([]);
  });

  it('is read-only: commands, malformed JSON and bad values get a clear refusal and change nothing', async () => {
    const { motion, server } = await start();
    const c = await client(server.feedUrl);
    c.send({ type: 'reReference' });
    expect(await c.next((m) => m.type === 'error', 'refusal')).toEqual({
      type: 'error',
      code: 'read-only',
      message: 'the feed is read-only and accepts only {"type":"subscribe"} (got type "reReference")',
    });
    c.send('{"type": "subscribe", ');
    const malformed = await c.next<{ code: string; message: string }>((m) => m.type === 'error', 'malformed refusal');
    expect(malformed.code).toBe('malformed-json');
    expect(malformed.message).toMatch(/^message is not valid JSON/);
    c.send({ type: 'subscribe', updateHz: 5000 });
    expect((await c.next<{ message: string }>((m) => m.type === 'error', 'rate refusal')).message).toBe('updateHz must be a number in (0, 200] (got 5000)');
    c.send({ type: 'subscribe', updateHz: 50, calibration: { offsetX: 0 } });
    expect((await c.next<{ message: string }>((m) => m.type === 'error', 'field refusal')).message).toBe('unknown field "calibration" in subscribe');
    // Still connected and measuring: the position is the motion's, untouched by the commands.
    c.send({ type: 'subscribe', updateHz: 50 });
    await c.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(-1.25, 1000);
    const update = await c.next<FeedUpdateMessage>(isUpdate(999), 'update');
    expect(update.axes[0]!.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
  });

  it('re-reference commands: refused without a configured token even on loopback, and with a wrong one or a bad field, never reaching the handler', async () => {
    const calls: unknown[] = [];
    const onReference = (request: unknown) => {
      calls.push(request);
      return { ok: true as const, axes: ['X'], sampleIndex: 1234, presetM: 0.001 };
    };
    const open = await start({ onReference });
    const c = await client(open.server.feedUrl);
    expect(await c.next((m) => m.type === 'hello', 'hello')).toMatchObject({ readOnly: false, commands: ['reference'] });
    c.send({ type: 'reference', token: TOKEN, id: 'a' });
    expect(await c.next((m) => m.id === 'a', 'refusal')).toEqual({
      type: 'error', code: 'refused', id: 'a',
      message: 'commands need a token and this measurement has none (give it one: --token or FRINGETALLY_FEED_TOKEN); nothing changed',
    });
    await server!.close();
    const guarded = await start({ onReference, token: TOKEN });
    const g = await client(guarded.server.feedUrl);
    g.send({ type: 'reference', token: 'x'.repeat(20), id: 'b' });
    expect(await g.next((m) => m.id === 'b', 'refusal')).toMatchObject({ code: 'refused', message: 'wrong token; nothing changed' });
    g.send({ type: 'reference', token: TOKEN, presetM: 'far', id: 'c' });
    expect(await g.next((m) => m.id === 'c', 'refusal')).toMatchObject({ code: 'bad-message', message: 'presetM must be a number of metres in [-1000, 1000] (got "far"); nothing changed' });
    g.send({ type: 'reference', token: TOKEN, move: 1, id: 'd' });
    expect(await g.next((m) => m.id === 'd', 'refusal')).toMatchObject({ code: 'bad-message', message: 'unknown field "move" in reference; nothing changed' });
    expect(calls).toEqual([]);
    g.send({ type: 'reference', token: TOKEN, axis: 'X', presetM: 0.001, id: 'e' });
    expect(await g.next((m) => m.id === 'e', 'reply')).toEqual({ type: 'referenced', axes: ['X'], sampleIndex: 1234, presetM: 0.001, id: 'e' });
    expect(calls).toEqual([{ axis: 'X', presetM: 0.001, origin: 'WebSocket 127.0.0.1' }]);
  });

  it('closes a connection whose message is oversized (1009) and keeps serving others', async () => {
    const { motion, server } = await start({ maxMessageBytes: 256 });
    const big = await client(server.feedUrl);
    big.send({ type: 'subscribe', padding: 'x'.repeat(1000) });
    expect((await big.closed).code).toBe(1009);
    const other = await client(server.feedUrl);
    other.send({ type: 'subscribe', updateHz: 50 });
    await other.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(1, 1000);
    expect((await other.next<FeedUpdateMessage>(isUpdate(999), 'update')).axes[0]!.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
  });

  it('requires the token when one is set: wrong or missing is refused with 401, the right one works', async () => {
    const { motion, server } = await start({ token: TOKEN });
    expect(server.feedUrl).toContain(`?token=${TOKEN}`);
    const bare = server.feedUrl.replace(/\?.*$/, '');
    await expect(openClient(`${bare}?token=wrong-token-0123456789`)).rejects.toMatchObject({ status: 401, body: 'wrong or missing token' });
    await expect(openClient(bare)).rejects.toMatchObject({ status: 401 });
    expect((await get(server.pageUrl.replace(/\?.*$/, ''))).status).toBe(401);
    const bearer = await client(bare, { Authorization: `Bearer ${TOKEN}` });
    await bearer.next((m) => m.type === 'hello', 'hello');
    const c = await client(server.feedUrl);
    c.send({ type: 'subscribe', updateHz: 50 });
    await c.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(0.5, 1000);
    await c.next(isUpdate(999), 'update');
    expect((await get(server.pageUrl)).status).toBe(200);
  });

  it('refuses other origins and non-loopback Host headers (no cross-site or rebinding access)', async () => {
    const { server } = await start();
    const page = new URL(server.pageUrl).origin;
    await expect(openClient(server.feedUrl, { Origin: 'http://evil.example' })).rejects.toMatchObject({ status: 403, body: 'origin http://evil.example not allowed' });
    await expect(openClient(server.feedUrl, { Host: 'evil.example' })).rejects.toMatchObject({ status: 403 });
    const sameOrigin = await client(server.feedUrl, { Origin: page });
    await sameOrigin.next((m) => m.type === 'hello', 'hello');
    expect((await get(server.pageUrl, { Host: `rebound.example:${server.port}` })).status).toBe(403);
  });

  it('refuses to serve beyond loopback without a token, before binding', async () => {
    const axes = createAxes(createMotion().source, { axes: [axisOptions] });
    await expect(startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, host: '0.0.0.0' })).rejects.toThrow(
      'token must be set when host is not loopback (host 0.0.0.0 is reachable from the network) (got undefined)',
    );
    await expect(startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, token: 'short' })).rejects.toThrow('token must be a string of at least 16 characters (got "(hidden)")');
  });

  it('reports a port already in use and leaves the first server running', async () => {
    const { server } = await start();
    const axes = createAxes(createMotion().source, { axes: [axisOptions] });
    await expect(startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, port: server.port })).rejects.toThrow(/EADDRINUSE/);
    const c = await client(server.feedUrl);
    await c.next((m) => m.type === 'hello', 'hello');
  });

  it('lets a consumer that reconnects resume: same reference, sample index continues', async () => {
    const { motion, server } = await start();
    const first = await client(server.feedUrl);
    first.send({ type: 'subscribe', updateHz: 50 });
    await first.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(3, 1000);
    const before = await first.next<FeedUpdateMessage>(isUpdate(999), 'first update');
    const fringesBefore = motion.fringes;
    first.socket.close();
    await first.closed;
    motion.move(1.5, 1000); // while nobody is connected
    const again = await client(server.feedUrl);
    again.send({ type: 'subscribe', updateHz: 50 });
    // The first update comes at once, from the current state, before any new block.
    const resumed = await again.next<FeedUpdateMessage>((m) => m.type === 'update', 'first update after reconnect');
    expect(resumed.sampleIndex).toBe(1999);
    expect(resumed.seq).toBe(1);
    motion.move(0.25, 1000);
    const after = await again.next<FeedUpdateMessage>(isUpdate(2999), 'update after reconnect');
    // Fringes are relative to the first sample (the pipeline's zero), which sits 3/1000 fringe into the motion.
    expect(before.axes[0]!.positionM! / METRES_PER_FRINGE).toBeCloseTo(fringesBefore, 9);
    expect(fringesBefore).toBeCloseTo(3 - 3 / 1000, 12);
    expect(after.sampleIndex).toBe(2999);
    expect(after.axes[0]!.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
    expect(motion.fringes).toBeCloseTo(4.75 - 3 / 1000, 12);
  });

  it('gives a client that stops reading at most one stale update, then one that covers the whole stall', async () => {
    const motion = createMotion();
    const axes = createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }], tracePoints: 4096, tracePointsPerBlock: 4096 });
    server = await startFeedServer({ source: { axes, rateHz: axisOptions.rateHz }, maxUpdateHz: 200 });
    const c = await client(server.feedUrl);
    c.send({ type: 'subscribe', updateHz: 200, trace: true });
    await c.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(0.5, 4000);
    await c.next(isUpdate(3999), 'update before the stall');
    // Stop reading, as a stalled consumer would: its pongs stop with it.
    const tcp = (c.socket as unknown as { _socket: { pause(): void; resume(): void } })._socket;
    tcp.pause();
    const seqAtStall = server.clients[0]!.seq;
    const stalledFrom = motion.sampleCount;
    const pause = () => new Promise((resolve) => setTimeout(resolve, 5));
    let largestQueue = 0;
    for (let round = 0; round < 100; round++) {
      motion.move(0.5, 4000);
      await pause();
      largestQueue = Math.max(largestQueue, server.clients[0]!.bufferedBytes);
    }
    // 100 blocks at 200 Hz for ≥ 0.5 s would have been ≥ 100 updates of ≈ 130 kB each (trace of 4096 points).
    expect(server.clients[0]!.seq - seqAtStall).toBeLessThanOrEqual(1);
    expect(server.counts.updatesMerged).toBeGreaterThanOrEqual(1);
    const last = motion.sampleCount - 1;
    const received: FeedUpdateMessage[] = [];
    c.socket.on('message', (data) => {
      const message = JSON.parse(data.toString()) as FeedUpdateMessage;
      if (message.type === 'update') received.push(message);
    });
    tcp.resume();
    const latest = await c.next<FeedUpdateMessage>(isUpdate(last), 'the latest update after resuming');
    const stale = received.filter((update) => update.sampleIndex < last);
    console.info(`slow client: ${stale.length} stale update(s) after a stall of ${last + 1 - stalledFrom} samples; largest socket queue ${largestQueue} bytes`);
    expect(stale.length).toBeLessThanOrEqual(1);
    expect(received.findIndex((update) => update.seq === latest.seq)).toBe(stale.length);
    expect(latest.axes[0]!.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
    // The update after the stall covers all of it: it continues where the stale one (or the last read before the stall) ended.
    const coveredFrom = stale.length === 1 ? stale[0]!.sampleIndex : stalledFrom - 1;
    expect(latest.sampleIndex - latest.axes[0]!.samples).toBe(coveredFrom);
    expect(latest.axes[0]!.positionMaxM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
  });

  it('tells clients when the source ends and closes them normally', async () => {
    const { motion, server } = await start();
    const c = await client(server.feedUrl);
    c.send({ type: 'subscribe', updateHz: 50 });
    await c.next((m) => m.type === 'subscribed', 'subscribed');
    motion.move(1, 500);
    motion.source.complete();
    await c.next((m) => m.type === 'end', 'end');
    expect((await c.closed).code).toBe(1000);
  });

  it('serves the page self-contained, with a strict content policy', async () => {
    const { server } = await start();
    const page = await get(server.pageUrl);
    expect(page.status).toBe(200);
    expect(page.headers['content-security-policy']).toMatch(/default-src 'none'; script-src 'nonce-[^']+'/);
    expect(page.body).not.toMatch(/(src|href)\s*=\s*["']?(https?:)?\/\//);
    expect((await get(server.pageUrl.replace(/\/$/, '/other'))).status).toBe(404);
  });
});
