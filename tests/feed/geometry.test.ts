// The WebSocket feed carries the geometry of parallel axes (yaw and the point of interest) beside the positions,
// with a real client over loopback; an axis the geometry names but the source lacks is refused at attach.
// Geometry conventions and their checks: tests/core/axis-geometry.test.ts.
import { afterEach, describe, expect, it } from 'vitest';
import { Subject } from 'rxjs';
import { createAxes, type FrameBlock } from '../../src/stream/index.js';
import mqtt from 'mqtt';
import { startFeedServer, startMqttPublisher, type FeedServer, type FeedUpdateMessage, type MqttGeometryMessage, type MqttPublisher } from '../../src/io/feed/index.js';
import { startBroker, type Broker } from './broker.js';
import { axisOptions, frame, METRES_PER_FRINGE, quadrature, ramp } from '../stream/signal.js';
import { openClient, type TestClient } from './support.js';

let server: FeedServer | null = null;
let client: TestClient | null = null;
let broker: Broker | null = null;
let publisher: MqttPublisher | null = null;
afterEach(async () => {
  client?.socket.terminate();
  await server?.close();
  server = null;
  await publisher?.close();
  publisher = null;
  await broker?.stop();
  broker = null;
});

describe('feed geometry', () => {
  it('sends yaw and the point of interest in each update', async () => {
    const source = new Subject<FrameBlock>();
    const axes = createAxes(source, { axes: [{ ...axisOptions, name: 'L' }, { ...axisOptions, name: 'R' }] });
    const geometry = { beams: [{ xM: -0.05, yM: 0 }, { xM: 0.05, yM: 0 }], pointOfInterest: { xM: 0.2, yM: 0 }, model: 'small-angle' as const };
    server = await startFeedServer({ source: { axes, rateHz: axisOptions.rateHz, geometry }, maxUpdateHz: 200 });
    client = await openClient(server.feedUrl);
    client.send({ type: 'subscribe', updateHz: 100 });
    await client.next((m) => m.type === 'subscribed', 'subscribed');
    // Invented: the left beam moves 1 fringe, the right one 3 fringes over 1000 samples.
    const signals = [quadrature(ramp(1000, 1)), quadrature(ramp(1000, 3))];
    for (let k = 0; k < 4; k++) source.next(frame(signals, 250 * k, 250));
    const update = await client.next<FeedUpdateMessage>((m) => m.type === 'update' && (m.sampleIndex as number) >= 999, 'the last update');
    const [left, right] = update.axes.map((axis) => axis.positionM!);
    // Hand-worked (small angles, z_k = d − ψ x_k): ψ = −(right − left)/100 mm; the point 200 mm out reads
    // (left + right)/2 + (right − left)/0.1 · 0.2. About 2 fringes apart: ψ ≈ −2 · 316.5 nm / 0.1 m = −6.3 µrad.
    expect(right! - left!).toBeCloseTo((2 * 999 / 1000) * METRES_PER_FRINGE, 10);
    expect(update.geometry!.yawRad).toBeCloseTo(-(right! - left!) / 0.1, 15);
    expect(update.geometry!.pitchRad).toBeNull();
    expect(update.geometry!.pointM).toBeCloseTo((left! + right!) / 2 + ((right! - left!) / 0.1) * 0.2, 15);
  });

  it('publishes the geometry on its own MQTT topic', async () => {
    broker = await startBroker();
    const source = new Subject<FrameBlock>();
    const axes = createAxes(source, { axes: [{ ...axisOptions, name: 'L' }, { ...axisOptions, name: 'R' }] });
    const geometry = { beams: [{ xM: 0, yM: -0.05 }, { xM: 0, yM: 0.05 }] };
    publisher = await startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz, geometry }, url: broker.url, topicPrefix: 'lab', updateHz: 50 });
    expect(publisher.geometryTopic).toBe('lab/geometry');
    const subscriber = await mqtt.connectAsync(broker.url, { reconnectPeriod: 0 });
    try {
      const last = new Promise<MqttGeometryMessage>((resolve) =>
        subscriber.on('message', (_topic, payload) => {
          const message = JSON.parse(payload.toString()) as MqttGeometryMessage;
          if (message.sampleTimeS !== null && message.sampleTimeS >= 999 / axisOptions.rateHz) resolve(message);
        }),
      );
      await subscriber.subscribeAsync('lab/geometry', { qos: 1 });
      // Invented: the lower beam still, the upper one 2 fringes over 1000 samples: pitch = 2 fringes / 100 mm.
      const signals = [quadrature(new Float64Array(1000)), quadrature(ramp(1000, 2))];
      for (let k = 0; k < 4; k++) source.next(frame(signals, 250 * k, 250));
      source.complete();
      const message = await last;
      expect(message.type).toBe('geometry');
      expect(message.yawRad).toBeNull();
      // Exact model: θ = atan(slope) with slope = 2·999/1000 fringes · 316.4954 nm / 0.1 m (int16 samples: 1e-4 fringe).
      expect(message.pitchRad! / Math.atan(((2 * 999) / 1000) * METRES_PER_FRINGE / 0.1)).toBeCloseTo(1, 3);
    } finally {
      await subscriber.endAsync(true);
    }
  });

  it('refuses a geometry naming an axis the source does not have', async () => {
    const axes = createAxes(new Subject<FrameBlock>(), { axes: [{ ...axisOptions, name: 'L' }, { ...axisOptions, name: 'R' }] });
    const geometry = { beams: [{ xM: 0, yM: 0 }, { xM: 0.1, yM: 0 }], axes: ['L', 'Q'] };
    await expect(startFeedServer({ source: { axes, rateHz: axisOptions.rateHz, geometry } })).rejects.toThrow(/2 axes needed \(L, Q\); the updates carry L, R/);
    await expect(startMqttPublisher({ source: { axes, rateHz: axisOptions.rateHz, geometry }, url: 'mqtt://127.0.0.1:9' })).rejects.toThrow(/2 axes needed \(L, Q\)/);
  });
});
