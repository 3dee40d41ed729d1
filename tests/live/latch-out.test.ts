// Positions at trigger edges end to end over a real pseudo-terminal pair (socat): `fringetally emulate` sends
// version 2 frames of a known vibration with trigger edges at known sub-sample times, `fringetally listen
// --latch-out` writes the position at each, and the same edges reach a WebSocket client and an MQTT subscriber
// (Mosquitto). Each position is checked against the motion's formula, x(t) = A·sin(2πft), within the bound the
// library states plus the samples' own error (measured on listen's own rows against the same formula).
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import mqtt from 'mqtt';
import { beforeAll, describe, expect, it } from 'vitest';
import { WebSocket } from 'ws';
import { startBroker, type Broker } from '../feed/broker.js';
import { until } from '../serial/wait.js';
import { fringetally } from '../tools/cli.js';
import { finished, readJson, readRows, startCli, usePtyPairs } from './processes.js';

const RATE = 50_000;
const SPF = 100;
const DURATION = 0.2; // 10 000 samples, 100 frames
// The invented motion: 10 µm at 50 Hz. Peak speed A·2πf = 3.1 mm/s, under the quarter fringe per sample
// (λ·f_s/(4·fold) = 4.0 mm/s at fold 2, common practice); peak acceleration A·(2πf)² = 0.99 m/s², which makes
// linear interpolation err by up to a·T²/8 = 4.9e-11 m (Lagrange remainder), ten times the samples' own error.
const AMPLITUDE = 1e-5;
const FREQUENCY = 50;
const motion = (tS: number) => AMPLITUDE * Math.sin(2 * Math.PI * FREQUENCY * tS);
const PEAK_ACCELERATION = AMPLITUDE * (2 * Math.PI * FREQUENCY) ** 2;
const TRIGGER_HZ = 997;
// Two edges at set times: just before frame 2's first sample (its lead reaches into frame 1) and mid-frame.
const TRIGGER_AT = [0.004 - 1e-7, 0.100003];
const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
/** Rounding of the files: rows to 1e-12 m (±5e-13), edge rows to 1e-15 m. */
const ROUNDING_M = 1e-12;

const ptys = usePtyPairs('fringetally-latch-');
let dir = '';
beforeAll(() => {
  dir = ptys.dir();
});

/** The edge times emulate sends, as absolute sample times rounded to the wire's 2^-16 period (docs/wire-format.md). */
function expectedSampleTimes(): number[] {
  const times = [...TRIGGER_AT];
  for (let j = 1; j / TRIGGER_HZ < DURATION; j++) times.push(j / TRIGGER_HZ);
  return times.map((t) => Math.round(t * RATE * 65536) / 65536).sort((a, b) => a - b);
}

interface EdgeMessage {
  type: string;
  axis: string;
  line: number;
  edge: string;
  sampleTime: number;
  positionM: number;
  uncertaintyM: number;
}

describe('listen --latch-out over a pty', () => {
  it('every trigger edge at its sub-sample time, its position on the motion within the stated bound, in the file, the feed and MQTT', async () => {
    const broker: Broker = await startBroker({});
    try {
      const { device, firmware } = await ptys.pair();
      // The detectors' exact ellipse (emulate's defaults), so that no fit residual adds to the samples' error.
      writeFileSync(
        join(dir, 'exact.json'),
        JSON.stringify({ format: 'fringetally-calibration', version: 1, offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 }),
      );
      const subscriber = await mqtt.connectAsync(broker.url, { reconnectPeriod: 0 });
      const mqttEdges: EdgeMessage[] = [];
      subscriber.on('message', (_topic, payload) => mqttEdges.push(JSON.parse(payload.toString()) as EdgeMessage));
      await subscriber.subscribeAsync('bench/edge', { qos: 1 });
      const listen = startCli(
        ['listen', '--port', device, ...OPTICS, '--calibration', 'exact.json', '--out', 'rows.csv', '--latch-out', 'edges.csv', '--summary', 'listen.json',
          '--duration', String(DURATION), '--serve', '127.0.0.1:0', '--mqtt', broker.url, '--mqtt-topic', 'bench'],
        dir,
      );
      await listen.stderrHas('link up');
      await listen.stderrHas(/feed ws:\S+\)/);
      await listen.stderrHas(`MQTT broker at ${broker.url} connected`);
      const feedUrl = /feed (ws:\S+)\)/.exec(listen.output.stderr)![1]!;
      const feedEdges: EdgeMessage[] = [];
      let subscribed = false;
      const socket = new WebSocket(feedUrl);
      socket.on('message', (data) => {
        const message = JSON.parse(String(data)) as EdgeMessage;
        if (message.type === 'edge') feedEdges.push(message);
        if (message.type === 'subscribed') subscribed = true;
      });
      socket.on('open', () => socket.send(JSON.stringify({ type: 'subscribe' })));
      await until(() => subscribed, 'the feed to confirm the subscription');
      const emulate = startCli(
        ['emulate', '--port', firmware, '--rate-hz', String(RATE), '--motion', 'vibration', '--amplitude-m', String(AMPLITUDE), '--frequency-hz', String(FREQUENCY),
          '--noise', '0', ...OPTICS, '--duration', String(DURATION), '--samples-per-frame', String(SPF), '--include-rate',
          '--trigger-hz', String(TRIGGER_HZ), '--trigger-at', TRIGGER_AT.join(','), '--summary', 'emulate.json', '--quiet'],
        dir,
      );
      expect(await finished(emulate), emulate.output.stderr).toBe(0);
      expect(await finished(listen), listen.output.stderr).toBe(0);
      const expected = expectedSampleTimes();
      expect(readJson<{ edgesMade: number }>(join(dir, 'emulate.json')).edgesMade).toBe(expected.length);
      expect(readJson<{ latchOut: { rowsWritten: number } }>(join(dir, 'listen.json')).latchOut.rowsWritten).toBe(expected.length);

      const rows = readRows(join(dir, 'rows.csv')).columns;
      const sampleError = rows.position_m!.map((p, i) => Math.abs(p - motion(i / RATE)));
      const edges = readRows(join(dir, 'edges.csv'));
      const { sample_time: sampleTime, t, position_m: position, uncertainty_m: bound, line } = edges.columns;
      expect(sampleTime).toHaveLength(expected.length);
      let beyondSampleError = 0;
      sampleTime!.forEach((tau, e) => {
        expect(tau).toBeCloseTo(expected[e]!, 8);
        expect(t![e]).toBeCloseTo(tau / RATE, 11);
        expect(line![e]).toBe(0);
        const k = Math.ceil(tau);
        const error = Math.abs(position![e]! - motion(tau / RATE));
        const own = Math.max(sampleError[k - 1]!, sampleError[k]!) + ROUNDING_M;
        expect(error, `edge at sample time ${tau}`).toBeLessThanOrEqual(bound![e]! + own);
        // The bound is of the size the formula gives: 1.25·f(1−f)/2·a·T² at most, with the time-resolution term.
        expect(bound![e]!).toBeLessThan((2 * 1.25 * PEAK_ACCELERATION) / (8 * RATE * RATE));
        if (error > own) beyondSampleError++;
      });
      // The curvature is visible: without the interpolation bound, many edges would fail.
      expect(beyondSampleError).toBeGreaterThan(expected.length / 4);
      expect(edges.alarms.every((alarms) => alarms === '')).toBe(true);

      // The feed and MQTT carry the same edges (same time and position) as the file.
      await until(() => mqttEdges.length >= expected.length, `${expected.length} edge messages on MQTT (got ${mqttEdges.length})`, 15_000);
      socket.close();
      await subscriber.endAsync();
      for (const received of [feedEdges, mqttEdges]) {
        expect(received).toHaveLength(expected.length);
        received.forEach((message, e) => {
          expect(message).toMatchObject({ type: 'edge', axis: 'X', line: 0, edge: 'rising' });
          expect(message.sampleTime).toBeCloseTo(sampleTime![e]!, 8);
          expect(Math.abs(message.positionM - position![e]!)).toBeLessThan(1e-15);
          expect(Math.abs(message.uncertaintyM - bound![e]!)).toBeLessThan(1e-15);
        });
      }
    } finally {
      await broker.stop();
    }
  });

  it('trigger options are checked before the port opens: order, sign, text mode, edges per frame; --latch-out is an output', async () => {
    const base = ['emulate', '--port', '/dev/null', '--rate-hz', '1000', '--velocity-m-s', '0.001', ...OPTICS];
    const cases: [string[], RegExp][] = [
      [['--trigger-at', '0.2,0.1'], /--trigger-at times must increase \(0\.1 s follows 0\.2 s\)/],
      [['--trigger-at', '0.1,-1'], /--trigger-at takes positive times in seconds/],
      [['--trigger-hz', '0'], /--trigger-hz must be positive/],
      [['--trigger-hz', '10', '--text'], /--trigger-hz and --trigger-at apply to binary frames, not --text/],
      [['--trigger-hz', '100000', '--samples-per-frame', '4096'], /more than 256 edges into a frame of 4096 samples at 1000 Hz/],
    ];
    for (const [args, message] of cases) {
      const result = await fringetally([...base, ...args], dir);
      expect(result.code, args.join(' ')).toBe(2);
      expect(result.stderr).toMatch(message);
    }
    const same = await fringetally(['listen', '--port', '/dev/null', ...OPTICS, '--out', 'same.csv', '--latch-out', 'same.csv'], dir);
    expect(same.code).toBe(2);
    expect(same.stderr).toMatch(/--latch-out/);
  });
});
