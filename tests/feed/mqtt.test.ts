// The MQTT publisher against a real Mosquitto broker on loopback (started per test with its own config,
// stopped by PID): retained per-axis updates, resume after a subscriber reconnects, status with last will,
// and username/password refusal. Fails, never skips, when mosquitto is missing.
// Check values: displacement per fringe λ/(N·n), λ = 632.9908 nm, N = 2 (CIPM 2007, published; common practice).
import { afterEach, describe, expect, it } from 'vitest';
import mqtt, { type MqttClient } from 'mqtt';
import { createAxes } from '../../src/stream/index.js';
import { createMqttPublisher, startMqttPublisher, type MqttAxisMessage, type MqttPublisher, type MqttPublisherEvent } from '../../src/io/feed/index.js';
import { axisOptions, METRES_PER_FRINGE } from '../stream/signal.js';
import { startBroker, type Broker } from './broker.js';
import { createMotion } from './support.js';

let broker: Broker | null = null;
let publisher: MqttPublisher | null = null;
const subscribers: MqttClient[] = [];

afterEach(async () => {
  for (const client of subscribers.splice(0)) await client.endAsync(true);
  await publisher?.close();
  publisher = null;
  await broker?.stop();
  broker = null;
});

/** A subscriber that queues messages of `topic` so a test can wait for one that matches. */
async function subscriber(url: string, topic: string, extra: mqtt.IClientOptions = {}) {
  const client = await mqtt.connectAsync(url, { reconnectPeriod: 0, ...extra });
  subscribers.push(client);
  const queue: Record<string, unknown>[] = [];
  let wake: (() => void) | null = null;
  client.on('message', (_topic, payload) => {
    queue.push(JSON.parse(payload.toString()) as Record<string, unknown>);
    wake?.();
  });
  await client.subscribeAsync(topic, { qos: 1 });
  return {
    client,
    async next<T>(match: (message: Record<string, unknown>) => boolean, what: string): Promise<T> {
      for (let waits = 0; waits < 10_000; waits++) {
        while (queue.length > 0) {
          const message = queue.shift()!;
          if (match(message)) return message as T;
        }
        await new Promise<void>((resolve) => (wake = resolve));
      }
      throw new Error(`no ${what}`);
    },
  };
}

const reached = (sampleIndex: number) => (m: Record<string, unknown>) => m.type === 'axis' && (m.sampleIndex as number) >= sampleIndex;

describe('MQTT publisher', () => {
  it('publishes retained per-axis updates; a reconnecting subscriber resumes from the latest', async () => {
    broker = await startBroker();
    const motion = createMotion();
    const axes = createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }] });
    publisher = await startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, url: broker.url, topicPrefix: 'lab/bench1', updateHz: 50 });
    expect(publisher.axisTopics).toEqual(['lab/bench1/axis/X']);
    const status = await subscriber(broker.url, publisher.statusTopic);
    expect(await status.next((m) => m.type === 'status', 'status')).toMatchObject({ type: 'status', schema: 1, state: 'online', measurement: 'live', axes: ['X'], rateHz: 1e6 });

    const first = await subscriber(broker.url, 'lab/bench1/axis/X');
    motion.move(2, 1000);
    const update = await first.next<MqttAxisMessage>(reached(999), 'update at sample 999');
    expect(update.name).toBe('X');
    expect(update.schema).toBe(1);
    expect(update.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
    expect(update.alarms).toEqual([]);
    await first.client.endAsync();

    motion.move(-0.5, 1000); // while the subscriber is away
    const again = await subscriber(broker.url, 'lab/bench1/axis/X');
    const resumed = await again.next<MqttAxisMessage>(reached(1999), 'retained update after reconnect');
    expect(resumed.seq).toBeGreaterThan(update.seq);
    expect(resumed.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);

    await publisher.close();
    publisher = null;
    expect(await status.next((m) => m.state === 'offline', 'offline status')).toMatchObject({ state: 'offline' });
  });

  it('publishes several axes on their own topics', async () => {
    broker = await startBroker();
    const motion = createMotion();
    // Both axes read the same two channels here: an invented rig with a spare channel pair duplicated.
    const frames = new (await import('rxjs')).Subject<import('../../src/stream/index.js').FrameBlock>();
    motion.source.subscribe((block) => {
      const samples = new Int16Array(4 * block.length);
      for (let s = 0; s < block.length; s++) {
        samples[4 * s] = samples[4 * s + 2] = Math.round(block.x[s]!);
        samples[4 * s + 1] = samples[4 * s + 3] = Math.round(block.y[s]!);
      }
      frames.next({ samples, channelCount: 4, samplesPerFrame: block.length });
    });
    const axes = createAxes(frames, { axes: [{ ...axisOptions, name: 'X' }, { ...axisOptions, name: 'Y' }] });
    publisher = await startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, url: broker.url, updateHz: 50 });
    const all = await subscriber(broker.url, 'fringetally/axis/+');
    motion.move(1, 1000);
    const x = await all.next<MqttAxisMessage>((m) => reached(999)(m) && m.name === 'X', 'axis X');
    const y = await all.next<MqttAxisMessage>((m) => reached(999)(m) && m.name === 'Y', 'axis Y');
    expect(x.positionM).toBe(y.positionM);
    // int16 rounding of the samples: about 1e-4 rad of phase, so 1e-4 fringe.
    expect(x.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 4);
  });

  it('logs in with username and password; a wrong password is refused with a clear error', async () => {
    broker = await startBroker({ users: { stage: 'correct horse battery' } });
    const axes = createAxes(createMotion().source, { axes: [axisOptions] });
    await expect(startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, url: broker.url, username: 'stage', password: 'wrong' })).rejects.toThrow(
      new RegExp(`^MQTT broker at ${broker.url.replace(/[.]/g, '\\.')} refused or failed the connection: .*(Not authorized|Bad User Name or Password)`),
    );
    publisher = await startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, url: broker.url, username: 'stage', password: 'correct horse battery' });
    const status = await subscriber(broker.url, publisher.statusTopic, { username: 'stage', password: 'correct horse battery' });
    expect(await status.next((m) => m.type === 'status', 'status')).toMatchObject({ state: 'online' });
  });

  it('publishes over TLS to a broker whose CA it is given; without that CA the broker is refused, naming it', async () => {
    broker = await startBroker({ tls: true });
    expect(broker.url).toMatch(/^mqtts:\/\/127\.0\.0\.1:\d+$/);
    const motion = createMotion();
    const axes = createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }] });
    // The system's CAs do not know this broker's: the certificate check must fail, not pass silently.
    await expect(startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, url: broker.url, connectTimeoutMs: 5000 })).rejects.toThrow(
      new RegExp(`^MQTT broker at ${broker.url.replace(/[.]/g, '\\.')} refused or failed the connection: .*(self[- ]signed|unable to verify|issuer)`, 'i'),
    );
    publisher = await startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, url: broker.url, topicPrefix: 'lab/tls', updateHz: 50, tls: { ca: broker.ca! } });
    const updates = await subscriber(broker.url, publisher.axisTopics[0]!, { ca: broker.ca! });
    motion.move(3, 1000);
    const update = await updates.next<MqttAxisMessage>(reached(999), 'update at sample 999 over TLS');
    expect(update.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
  });

  it('never stops the measurement for a broker that is down or goes away: retries with backoff, reports each outage once', async () => {
    const first = await startBroker();
    const port = first.port;
    await first.stop(); // the broker is down from the start
    const events: MqttPublisherEvent[] = [];
    const motion = createMotion();
    publisher = createMqttPublisher({
      url: `mqtt://127.0.0.1:${port}`,
      updateHz: 50,
      reconnectPeriodMs: 100,
      maxReconnectPeriodMs: 400,
      reportIntervalMs: 86_400_000,
      onEvent: (event) => events.push(event),
    });
    const running = publisher;
    const until = async (condition: () => boolean, what: string) => {
      for (let wait = 0; wait < 3000 && !condition(); wait++) await new Promise((resolve) => setTimeout(resolve, 10));
      if (!condition()) throw new Error(`never happened: ${what}`);
    };
    await until(() => running.health.failedAttempts >= 4, 'four failed attempts');
    // The measurement starts while the broker is still down, and runs on.
    running.attach({ axes: createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }] }), rateHz: axisOptions.rateHz });
    motion.move(2, 1000);
    expect(events.filter((event) => event.kind !== 'down')).toEqual([]);
    expect(events).toHaveLength(1);
    expect(events[0]).toMatchObject({ kind: 'down', message: expect.stringMatching(/ECONNREFUSED/), retryInMs: 100 });

    broker = await startBroker({ port });
    await until(() => running.health.connected, 'connected once the broker is up');
    const updates = await subscriber(broker.url, 'fringetally/axis/X');
    motion.move(1, 1000);
    const update = await updates.next<MqttAxisMessage>(reached(1999), 'update after the broker came up');
    expect(update.positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
    expect(update).toMatchObject({ rateHz: 1e6, sampleTimeS: update.sampleIndex / 1e6 });
    const attempts = running.health.failedAttempts;
    expect(events.at(-1)).toMatchObject({ kind: 'connected', first: true, attempts });

    // The broker goes away mid-run and comes back: one more outage, and the measurement never noticed.
    await updates.client.endAsync(true);
    subscribers.length = 0;
    await broker.stop();
    await until(() => !running.health.connected && running.health.outages === 2, 'the second outage noticed');
    motion.move(-0.5, 1000);
    broker = await startBroker({ port });
    await until(() => running.health.connected, 'reconnected');
    const again = await subscriber(broker.url, 'fringetally/axis/X');
    motion.move(0, 1000);
    expect((await again.next<MqttAxisMessage>(reached(3999), 'update after the reconnection')).positionM! / METRES_PER_FRINGE).toBeCloseTo(motion.fringes, 9);
    const health = running.health;
    console.info(`MQTT outages: ${health.outages}, ${health.failedAttempts} failed attempts, ${(health.outageMs / 1000).toFixed(2)} s offline, ${events.length} events reported`);
    expect(health).toMatchObject({ connected: true, connections: 2, outages: 2, lastError: expect.stringMatching(/ECONNREFUSED|closed/) });
    expect(health.outageMs).toBeGreaterThan(0);
    expect(events.map((event) => event.kind)).toEqual(['down', 'connected', 'down', 'connected']);
  });

  it('rate-limits the reports of a long outage: at most one per reportIntervalMs, however many attempts', async () => {
    const gone = await startBroker();
    await gone.stop();
    const events: MqttPublisherEvent[] = [];
    publisher = createMqttPublisher({ url: gone.url, reconnectPeriodMs: 100, maxReconnectPeriodMs: 100, reportIntervalMs: 250, onEvent: (event) => events.push(event) });
    const running = publisher;
    // Attempts come at least 100 ms apart: after 8 of them (≥ 700 ms) at least one still-down report has come,
    // and the reports are at least 250 ms of outage apart, however many attempts fell between them.
    // The deadline is wall-clock time, only there to end a hung run: a loaded machine stretches every timer.
    const deadline = Date.now() + 60_000;
    while (Date.now() < deadline && running.health.failedAttempts < 8) await new Promise((resolve) => setTimeout(resolve, 10));
    const stillDown = events.filter((event) => event.kind === 'still-down');
    expect(events[0]).toMatchObject({ kind: 'down' });
    expect(stillDown.length).toBeGreaterThanOrEqual(1);
    const outageAt = stillDown.map((event) => event.outageMs);
    expect(outageAt[0]).toBeGreaterThanOrEqual(250);
    for (let k = 1; k < outageAt.length; k++) expect(outageAt[k]! - outageAt[k - 1]!).toBeGreaterThanOrEqual(250);
    console.info(`long outage: ${running.health.failedAttempts} failed attempts, ${stillDown.length} still-down reports`);
    expect(stillDown[0]).toMatchObject({ message: expect.stringMatching(/ECONNREFUSED/), retryInMs: 100 });
    expect((stillDown[0] as { attempts: number }).attempts).toBeGreaterThanOrEqual(2);
  }, 120_000);

  it('publishes status waiting before its source is attached, then live and ended', async () => {
    broker = await startBroker();
    const status = await subscriber(broker.url, 'fringetally/status');
    publisher = createMqttPublisher({ url: broker.url });
    expect(await status.next((m) => m.type === 'status', 'status')).toMatchObject({ state: 'online', measurement: 'waiting', axes: [], rateHz: null });
    const motion = createMotion();
    publisher.attach({ axes: createAxes(motion.source, { axes: [{ ...axisOptions, name: 'X' }] }), rateHz: axisOptions.rateHz });
    expect(await status.next((m) => m.measurement === 'live', 'live')).toMatchObject({ state: 'online', axes: ['X'], rateHz: 1e6 });
    motion.move(1, 1000);
    motion.source.complete();
    expect(await status.next((m) => m.measurement === 'ended', 'ended')).toMatchObject({ state: 'online' });
  });

  it('rejects invalid options naming the option and rule', async () => {
    const axes = createAxes(createMotion().source, { axes: [axisOptions] });
    await expect(startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, topicPrefix: 'lab/#' })).rejects.toThrow('topicPrefix must be MQTT topic levels without +, # or empty levels (got "lab/#")');
    await expect(startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, username: 'stage' })).rejects.toThrow('password must be given together with username (got undefined)');
    await expect(startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz }, url: 'http://broker' })).rejects.toThrow('url must be an mqtt:// or mqtts:// URL (got "http://broker")');
  });
});
