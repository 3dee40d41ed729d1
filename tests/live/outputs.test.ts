// Three detector outputs per axis end to end over a real pseudo-terminal pair (socat): `fringetally emulate
// --outputs 3` sends version 3 frames (channel layout: one axis of three outputs 120° apart) whose source power
// swings by ±20 %, `fringetally listen` tracks them with a calibration of those outputs or its own live fit.
// Positions are checked against the motion's formula (constant velocity from 0: x = v·t), the power column against
// emulate's P(t) (both invented models, docs/live.md); the feed's status reports the layout.
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import mqtt from 'mqtt';
import { WebSocket } from 'ws';
import { startBroker, type Broker } from '../feed/broker.js';
import { wrapPhase } from '../../src/core/index.js';
import { EMULATED_OUTPUTS } from '../../tools/live/frame-emulator.js';
import { fringetally } from '../tools/cli.js';
import { until } from '../serial/wait.js';
import { finished, readJson, readRows, startCli, usePtyPairs } from './processes.js';

const RATE = 100_000;
const DURATION = 0.5;
const VELOCITY = 0.001;
const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
/**
 * Largest |listen − v·t| accepted, m. Noise of 20 counts on each of three outputs of amplitude ~10 000 gives
 * about 1.5 mrad of phase, 0.08 nm RMS at 50 nm/rad (λ/(4π), fold 2); int16 rounding adds far less. A combination
 * that did not remove the source power would leave its ±20 % times the offsets (~2400 counts, ~0.24 rad, 12 nm).
 */
const POSITION_TOLERANCE_M = 2e-9;
/** emulate's three outputs as a calibration file names them (d1..d3). */
const LAYOUT = EMULATED_OUTPUTS[3].map((channel, k) => ({ name: `d${k + 1}`, ...channel }));
const calibrationFile = (channels: readonly object[], extra: object = {}) =>
  JSON.stringify({ format: 'fringetally-calibration', version: 2, layout: { model: 'emulated', channels }, ...extra });

interface AxisState {
  sampleIndex: number;
  alarms: string[];
  alarmsSeen: string[];
  events: { kind: string; state: string; value: number; unit: string; cause?: string; sampleIndex: number }[];
}

/** Samples held for the live fit (listen --fit-samples). */
const FIT_SAMPLES = 16_384;
/** emulate's source power, --power-modulation 0.2 at --power-frequency-hz 37 (docs/live.md): P = 1 + 0.2·sin(2π·37·t). */
const emulatedPower = (i: number) => 1 + 0.2 * Math.sin((2 * Math.PI * 37 * i) / RATE);

/** The mean of emulate's power over the first `samples` samples: a live fit's unit of power. */
function emulatedMeanPower(samples: number): number {
  let sum = 0;
  for (let i = 0; i < samples; i++) sum += emulatedPower(i);
  return sum / samples;
}

/**
 * The power column against emulate's P(t) over the unit's mean. Noise of 20 counts on each output, over the sum of
 * the offsets (36 000 counts), gives 20·√3/36 000 = 9.6e-4 RMS of power for the near-symmetric layout (the
 * estimate is about the outputs' sum over their offsets); a power not removed would leave the ±20 % swing itself.
 */
function checkPower(power: readonly number[], unit: number): void {
  expect(power).toHaveLength(RATE * DURATION);
  let sum = 0;
  let squares = 0;
  power.forEach((p, i) => {
    const error = p - emulatedPower(i) / unit;
    sum += error;
    squares += error * error;
  });
  expect(Math.abs(sum / power.length)).toBeLessThan(2e-4);
  expect(Math.sqrt(squares / power.length)).toBeLessThan(1.3e-3);
  // The column does follow the swing (±20 %), not a constant.
  expect(Math.max(...power) - Math.min(...power)).toBeGreaterThan(0.38);
}

const ptys = usePtyPairs('fringetally-outputs-');
const ptyPair = ptys.pair;
let dir = '';
beforeAll(() => {
  dir = ptys.dir();
  // The calibration of the emulated outputs (the layout emulate documents), as `calibrate --channels` writes it.
  writeFileSync(join(dir, 'three.json'), calibrationFile(LAYOUT));
});
const emulateArgs = (firmware: string) => [
  'emulate', '--port', firmware, '--rate-hz', String(RATE), '--velocity-m-s', String(VELOCITY), ...OPTICS, '--duration', String(DURATION),
  '--samples-per-frame', '100', '--include-rate', '--outputs', '3', '--power-modulation', '0.2', '--power-frequency-hz', '37', '--quiet',
];

describe('three detector outputs over a pty', () => {
  it('listen tracks three outputs with their calibration through a ±20 % power swing; the feed reports the outputs', async () => {
    const { device, firmware } = await ptyPair();
    const listen = startCli(
      ['listen', '--port', device, ...OPTICS, '--calibration', 'three.json', '--out', 'three.csv', '--summary', 'three.json.summary', '--duration', String(DURATION), '--serve', '127.0.0.1:0'],
      dir,
    );
    await listen.stderrHas('link up');
    await listen.stderrHas(/feed ws:\S+\)/);
    const statuses: { state: string; detectorOutputs: number[] | null }[] = [];
    const socket = new WebSocket(/feed (ws:\S+)\)/.exec(listen.output.stderr)![1]!);
    socket.on('message', (data) => {
      const message = JSON.parse(String(data)) as { type: string; state: string; detectorOutputs: number[] | null };
      if (message.type === 'status') statuses.push(message);
    });
    await until(() => statuses.length > 0, 'the feed to send its status');
    const emulate = startCli(emulateArgs(firmware), dir);
    expect(await finished(emulate), emulate.output.stderr).toBe(0);
    expect(await finished(listen), listen.output.stderr).toBe(0);
    socket.close();
    expect(statuses[0]).toMatchObject({ state: 'waiting', detectorOutputs: null });
    expect(statuses.find((status) => status.state === 'live')).toMatchObject({ detectorOutputs: [3] });
    expect(listen.output.stderr).toContain('tracking axis 0 (3 detector outputs)');
    const summary = readJson<{ samplesProcessed: number; detectorOutputs: number[]; channelCount: number; countLostAtEnd: boolean }>(join(dir, 'three.json.summary'));
    expect(summary).toMatchObject({ samplesProcessed: RATE * DURATION, detectorOutputs: [3], channelCount: 3, countLostAtEnd: false });
    const rows = readRows(join(dir, 'three.csv'));
    expect(rows.alarms.every((alarms) => alarms === '')).toBe(true);
    const { position_m: position, level } = rows.columns;
    expect(position).toHaveLength(RATE * DURATION);
    let worst = 0;
    position!.forEach((p, i) => (worst = Math.max(worst, Math.abs(p - (VELOCITY * i) / RATE))));
    expect(worst).toBeLessThan(POSITION_TOLERANCE_M);
    // The level is the power-normalised radius: it stays near 1 while the power swings by ±20 %.
    expect(Math.min(...level!)).toBeGreaterThan(0.95);
    expect(Math.max(...level!)).toBeLessThan(1.05);
  });

  it('without a calibration, listen fits the three outputs live (as calibrate --channels): positions, and the power column against the emulated power', async () => {
    const { device, firmware } = await ptyPair();
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'fit.csv', '--summary', 'fit.json', '--duration', String(DURATION), '--fit-samples', String(FIT_SAMPLES)], dir);
    await listen.stderrHas('link up');
    const emulate = startCli(emulateArgs(firmware), dir);
    expect(await finished(emulate), emulate.output.stderr).toBe(0);
    expect(await finished(listen), listen.output.stderr).toBe(0);
    const fitted = /fitted the correction to (\d+) of the first (\d+) samples \(coverage \d+ %\): 3 outputs: offsets ([-\d., ]+); amplitudes ([-\d., ]+); phases ([-\d., ]+) rad/.exec(listen.output.stderr);
    expect(fitted, listen.output.stderr).not.toBeNull();
    const held = Number(fitted![2]);
    // Held samples come in whole blocks as read.
    expect(held).toBeGreaterThanOrEqual(FIT_SAMPLES);
    // The outputs' parameters against emulate's layout (docs/live.md), all relative to the mean power over the
    // fitted samples; phases relative to output 1, as the calibration file's convention.
    const meanPower = emulatedMeanPower(held);
    const numbers = (text: string) => text.split(', ').map(Number);
    numbers(fitted![3]!).forEach((offset, k) => expect(Math.abs(offset / meanPower - EMULATED_OUTPUTS[3][k]!.offset)).toBeLessThan(10));
    numbers(fitted![4]!).forEach((amplitude, k) => expect(Math.abs(amplitude / meanPower - EMULATED_OUTPUTS[3][k]!.amplitude)).toBeLessThan(10));
    numbers(fitted![5]!).forEach((phase, k) => expect(Math.abs(wrapPhase(phase - EMULATED_OUTPUTS[3][k]!.phaseRad))).toBeLessThan(1e-3));
    const summary = readJson<{ calibrationSource: string; calibration: unknown; channels: { offset: number }[]; fit: { samples: number }; samplesProcessed: number }>(join(dir, 'fit.json'));
    expect(summary).toMatchObject({ calibrationSource: 'live fit', calibration: null, samplesProcessed: RATE * DURATION, fit: { samples: held } });
    expect(summary.channels).toHaveLength(3);
    const rows = readRows(join(dir, 'fit.csv'));
    expect(rows.alarms.every((alarms) => alarms === '')).toBe(true);
    expect(Object.keys(rows.columns)).toEqual(['t', 'position_m', 'velocity_m_s', 'level', 'power', 'alarms']);
    const { position_m: position, power } = rows.columns;
    expect(position).toHaveLength(RATE * DURATION);
    let worst = 0;
    position!.forEach((p, i) => (worst = Math.max(worst, Math.abs(p - (VELOCITY * i) / RATE))));
    expect(worst).toBeLessThan(POSITION_TOLERANCE_M);
    checkPower(power!, meanPower);
  });

  it('--record keeps every output: replay --calibration of the recording writes the rows listen wrote, byte for byte', async () => {
    const { device, firmware } = await ptyPair();
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--calibration', 'three.json', '--out', 'recorded.csv', '--record', 'record.csv', '--duration', String(DURATION)], dir);
    await listen.stderrHas('link up');
    const emulate = startCli(emulateArgs(firmware), dir);
    expect(await finished(emulate), emulate.output.stderr).toBe(0);
    expect(await finished(listen), listen.output.stderr).toBe(0);
    const record = readRows(join(dir, 'record.csv'));
    // Named as the calibration's outputs, so replay finds them without --channels.
    expect(Object.keys(record.columns)).toEqual(['d1', 'd2', 'd3']);
    expect(record.columns.d1).toHaveLength(RATE * DURATION);
    const replay = await fringetally(['replay', 'record.csv', '--calibration', 'three.json', ...OPTICS, '--out', 'replayed.csv', '--quiet'], dir);
    expect(replay.code, replay.stderr).toBe(0);
    expect(readFileSync(join(dir, 'replayed.csv'), 'utf8')).toBe(readFileSync(join(dir, 'recorded.csv'), 'utf8'));
    // The rows carry the source power of the calibration (mean 1 at the layout emulate uses).
    checkPower(readRows(join(dir, 'recorded.csv')).columns.power!, 1);
  });

  it("a calibration file's harmonics are applied to three outputs", async () => {
    // The harmonic correction takes e(φ) = 0.02·cos φ rad off the phase (docs/calibration-format.md), so every position
    // moves by −0.02·cos φ · λ/(4π) (fold 2) against the run without it, φ = 4π·v·t/λ being emulate's phase (it
    // starts at 0).
    writeFileSync(join(dir, 'harmonics.json'), calibrationFile(LAYOUT, { harmonics: { orders: 1, cos: [0.02], sin: [0] } }));
    const runs: Record<string, number[]> = {};
    for (const name of ['three', 'harmonics']) {
      const { device, firmware } = await ptyPair();
      const listen = startCli(['listen', '--port', device, ...OPTICS, '--calibration', `${name}.json`, '--out', `${name}-rows.csv`, '--duration', String(DURATION)], dir);
      await listen.stderrHas('link up');
      const emulate = startCli(emulateArgs(firmware), dir);
      expect(await finished(emulate), emulate.output.stderr).toBe(0);
      expect(await finished(listen), listen.output.stderr).toBe(0);
      runs[name] = readRows(join(dir, `${name}-rows.csv`)).columns.position_m!;
      expect(listen.output.stderr).not.toContain('calibration_stale');
    }
    const metresPerRad = 632.9908e-9 / (4 * Math.PI);
    let worst = 0;
    let largest = 0;
    runs.harmonics!.forEach((p, i) => {
      const phase = (4 * Math.PI * VELOCITY * i) / RATE / 632.9908e-9;
      const shift = p - runs.three![i]!;
      largest = Math.max(largest, Math.abs(shift));
      worst = Math.max(worst, Math.abs(shift + 0.02 * Math.cos(phase) * metresPerRad));
    });
    // 0.02 rad × 50.4 nm/rad = 1.007 nm at most; the noise moves φ by ~1.5 mrad, the shift by 0.02 × that.
    expect(largest / (0.02 * metresPerRad)).toBeCloseTo(1, 2);
    expect(worst).toBeLessThan(1e-10);
  });

  it('a stale calibration of three outputs raises calibration_stale on stderr, on the WebSocket feed and on MQTT; low_power travels alike', async () => {
    // Amplitudes 10 % too large (offsets kept) read the power-normalised radius as 1/1.1: −9.09 %, beyond the watch's
    // ±5 % (a gain common to every output would cancel in the power normalisation).
    writeFileSync(join(dir, 'stale.json'), calibrationFile(LAYOUT.map((channel) => ({ ...channel, amplitude: channel.amplitude * 1.1 }))));
    const expectedChange = 1 / 1.1 - 1;
    const broker: Broker = await startBroker({});
    try {
      const { device, firmware } = await ptyPair();
      const subscriber = await mqtt.connectAsync(broker.url, { reconnectPeriod: 0 });
      const published: AxisState[] = [];
      subscriber.on('message', (_topic, payload) => published.push(JSON.parse(payload.toString()) as AxisState));
      await subscriber.subscribeAsync('stale/axis/X', { qos: 1 });
      const listen = startCli(
        ['listen', '--port', device, ...OPTICS, '--calibration', 'stale.json', '--out', 'stale-rows.csv', '--duration', String(DURATION),
          '--serve', '127.0.0.1:0', '--mqtt', broker.url, '--mqtt-topic', 'stale'],
        dir,
      );
      await listen.stderrHas('link up');
      await listen.stderrHas(/feed ws:\S+\)/);
      await listen.stderrHas(`MQTT broker at ${broker.url} connected`);
      const updates: AxisState[] = [];
      let subscribed = false;
      const socket = new WebSocket(/feed (ws:\S+)\)/.exec(listen.output.stderr)![1]!);
      socket.on('message', (data) => {
        const message = JSON.parse(String(data)) as { type: string; axes: AxisState[] };
        if (message.type === 'subscribed') subscribed = true;
        if (message.type === 'update') updates.push(message.axes[0]!);
      });
      socket.on('open', () => socket.send(JSON.stringify({ type: 'subscribe', updateHz: 50 })));
      await until(() => subscribed, 'the feed to confirm the subscription');
      const emulate = startCli(emulateArgs(firmware), dir);
      expect(await finished(emulate), emulate.output.stderr).toBe(0);
      expect(await finished(listen), listen.output.stderr).toBe(0);
      const logged = /calibration_stale at t = ([\d.]+) s: the signal left the calibration's model \(the mean radius moved by (-[\d.]+) %\)/.exec(listen.output.stderr);
      expect(logged, listen.output.stderr).not.toBeNull();
      expect(Number(logged![2]) / 100).toBeCloseTo(expectedChange, 3);
      const raisedAt = Math.round(Number(logged![1]) * RATE);
      await until(() => published.some((state) => state.events.some((event) => event.kind === 'calibration_stale')), 'calibration_stale on MQTT');
      socket.close();
      await subscriber.endAsync();
      for (const [name, states] of [['WebSocket', updates], ['MQTT', published]] as const) {
        const events = states.flatMap((state) => state.events).filter((event) => event.kind === 'calibration_stale');
        // One raise, where stderr put it, with the radius change and its cause; never cleared (the gain stays wrong).
        expect(events, name).toHaveLength(1);
        expect(events[0]).toMatchObject({ kind: 'calibration_stale', state: 'raised', unit: 'relative radius', cause: 'radius-change', sampleIndex: raisedAt });
        expect(events[0]!.value).toBeCloseTo(expectedChange, 3);
        // Active in the state from then on, as any alarm: in `alarms` of the last state and `alarmsSeen` of the raise's.
        expect(states.at(-1)!.alarms, name).toContain('calibration_stale');
        const raising = states.find((state) => state.events.some((event) => event.kind === 'calibration_stale'))!;
        expect(raising.alarmsSeen, name).toContain('calibration_stale');
        // Not active in a state whose latest sample comes before the raise.
        for (const state of states) if (state.sampleIndex < raisedAt) expect(state.alarms, name).not.toContain('calibration_stale');
      }

      // low_power travels the same way: a calibration 2.2 times too bright (every offset and amplitude) reads the
      // source power as P/2.2, below the default 0.5 from the first sample on (P(0) = 1, so 1/2.2 = 0.4545) and never
      // back above the 0.6 that clears it (P ≤ 1.2). The phase is untouched: a common gain cancels.
      writeFileSync(join(dir, 'bright.json'), calibrationFile(LAYOUT.map((channel) => ({ ...channel, offset: channel.offset * 2.2, amplitude: channel.amplitude * 2.2 }))));
      const dim = await ptyPair();
      const lowPower: AxisState[] = [];
      const second = await mqtt.connectAsync(broker.url, { reconnectPeriod: 0 });
      second.on('message', (_topic, payload) => lowPower.push(JSON.parse(payload.toString()) as AxisState));
      await second.subscribeAsync('bright/axis/X', { qos: 1 });
      const bright = startCli(
        ['listen', '--port', dim.device, ...OPTICS, '--calibration', 'bright.json', '--out', 'bright-rows.csv', '--duration', String(DURATION), '--mqtt', broker.url, '--mqtt-topic', 'bright'],
        dir,
      );
      await bright.stderrHas(`MQTT broker at ${broker.url} connected`);
      const emulateBright = startCli(emulateArgs(dim.firmware), dir);
      expect(await finished(emulateBright), emulateBright.output.stderr).toBe(0);
      expect(await finished(bright), bright.output.stderr).toBe(0);
      await until(() => lowPower.some((state) => state.events.some((event) => event.kind === 'low_power')), 'low_power on MQTT');
      await second.endAsync();
      const powerEvents = lowPower.flatMap((state) => state.events).filter((event) => event.kind === 'low_power');
      expect(powerEvents).toHaveLength(1);
      expect(powerEvents[0]).toMatchObject({ state: 'raised', unit: 'relative power', sampleIndex: 0 });
      expect(powerEvents[0]!.value).toBeCloseTo(1 / 2.2, 2);
      expect(lowPower.at(-1)!.alarms).toContain('low_power');
      const brightRows = readRows(join(dir, 'bright-rows.csv'));
      expect(brightRows.alarms.every((alarms) => alarms === 'low_power')).toBe(true);
    } finally {
      await broker.stop();
    }
  });
});
