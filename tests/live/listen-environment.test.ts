// `listen --environment-log FILE` and `listen --environment-topic TOPIC` over a real pseudo-terminal (socat): a
// reading appended to the log, or published to the topic on a real Mosquitto broker, while listen runs rescales the
// rows from then on by the index ratio. The expected indices come from the library's refractiveIndexOfAir (Ciddor
// 1996, checked against published values in tests/metrology). Frames: an invented constant motion written by this
// test; a feed client tells when listen has processed them (conditions, never timings).
import { appendFileSync, closeSync, openSync, writeFileSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import mqtt from 'mqtt';
import { describe, expect, it } from 'vitest';
import { refractiveIndexOfAir } from '../../src/core/index.js';
import { createFrameEmulator } from '../../tools/live/frame-emulator.js';
import { startBroker } from '../feed/broker.js';
import { openClient } from '../feed/support.js';
import { finished, readJson, readRows, startCli, usePtyPairs } from './processes.js';

const RATE = 100_000;
const SPF = 100;
const VELOCITY = 0.008; // m/s, half the 0.0158 m/s limit λ·f_s/(2·fold) at fold 2 (common practice)
const WAVELENGTH_M = 632.9908e-9;
/** As in tests/live/live.test.ts: noise-free frames and the live fit's residual stay well inside 2 nm. */
const TOLERANCE_M = 2e-9;
const ptys = usePtyPairs('fringetally-environment-');

function emulatorOf() {
  return createFrameEmulator({
    rateHz: RATE, samplesPerFrame: SPF, axes: 1, motion: { kind: 'constant', velocityMS: VELOCITY }, wavelengthM: WAVELENGTH_M, fold: 2,
    refractiveIndex: 1, ellipse: { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 },
    noiseRms: 0, seed: 11, includeRate: true, startSequence: 0, text: false, faults: { garbageEvery: 0, garbageBytes: 1, dropEvery: 0, corruptEvery: 0 },
  });
}

/** Air before and after the reading both tests give (invented: 20 °C, 101 325 Pa → 35 °C, 80 kPa; 50 % RH). */
const INDEX_BEFORE = refractiveIndexOfAir({ temperatureC: 20, pressurePa: 101325, relativeHumidityPct: 50, vacuumWavelengthM: WAVELENGTH_M }).n;
const INDEX_AFTER = refractiveIndexOfAir({ temperatureC: 35, pressurePa: 80000, relativeHumidityPct: 50, vacuumWavelengthM: WAVELENGTH_M }).n;

/**
 * The largest |row − expected| of a result file: the count is the motion's in vacuum, the reading it divided by the
 * index in force, INDEX_BEFORE up to sample `stepSample` and INDEX_AFTER from there.
 */
function worstAgainstIndexStep(rowsPath: string, truth: readonly number[], stepSample: number, rowCount: number): number {
  const rows = readRows(rowsPath);
  expect(rows.columns.t).toHaveLength(rowCount);
  let worst = 0;
  rows.columns.t!.forEach((t, r) => {
    const index = Math.round(t * RATE);
    const expected = (truth[index]! - truth[0]!) / (index < stepSample ? INDEX_BEFORE : INDEX_AFTER);
    worst = Math.max(worst, Math.abs(rows.columns.position_m![r]! - expected));
  });
  return worst;
}

/** Writes `count` frames of the emulator to the pty, keeping the true positions. */
function framesTo(firmware: string, emulator: ReturnType<typeof createFrameEmulator>, truth: number[], count: number): void {
  const fd = openSync(firmware, 'w');
  try {
    for (let k = 0; k < count; k++) {
      const made = emulator.next(1);
      truth.push(...made.positionM);
      writeSync(fd, made.bytes);
    }
  } finally {
    closeSync(fd);
  }
}

describe('listen --environment-log', () => {
  it('follows the log as it grows: the rows after a new reading are scaled by the new index, those before keep the old', async () => {
    const dir = ptys.dir();
    const link = await ptys.pair();
    const log = join(dir, 'air.csv');
    // Invented readings: steady air, then (appended during the run) 80 kPa and 35 °C from t = 0.04 s on.
    writeFileSync(log, 't,temperature,pressure,humidity\n0,20,101325,50\n0.039,20,101325,50\n');
    const listen = startCli(
      ['listen', '--port', link.device, '--wavelength-nm', '632.9908', '--fold', '2', '--out', 'air.csv.rows.csv', '--summary', 'air.json',
        '--fit-samples', '1024', '--environment-log', log, '--serve', '127.0.0.1:0'],
      dir,
    );
    await listen.stderrHas('link up');
    expect(listen.output.stderr).toMatch(/environment log \S+air\.csv: 2 reading\(s\) to t = 0\.039 s, refractive index 1\.000\d+ \(ciddor\); followed as it grows/);
    const feedUrl = /\(feed (ws:\/\/127\.0\.0\.1:\d+\/feed)\)/.exec(listen.output.stderr)![1]!;
    const watcher = await openClient(feedUrl);
    watcher.send({ type: 'subscribe', updateHz: 50 });
    const processed = (frameCount: number) =>
      watcher.next((m) => m.type === 'update' && (m.sampleIndex as number) >= frameCount * SPF - 1, `positions up to frame ${frameCount}`);

    const emulator = emulatorOf();
    const truth: number[] = [];
    const batch = (count: number) => framesTo(link.firmware, emulator, truth, count);

    batch(40); // t < 0.04 s
    await processed(40);
    appendFileSync(log, '0.04,35,80000,50\n');
    await listen.stderrHas('reading at t = 0.04 s (35 °C, 80000 Pa, 50 %)');
    batch(40); // 0.04 s ≤ t < 0.08 s
    await processed(80);
    watcher.socket.close();
    listen.child.kill('SIGINT');
    expect(await finished(listen), listen.output.stderr).toBe(0);

    // The step must matter here: (1/after − 1/before) over 320 µm is about 22 nm.
    expect(Math.abs(1 / INDEX_AFTER - 1 / INDEX_BEFORE) * VELOCITY * 0.04).toBeGreaterThan(5 * TOLERANCE_M);
    expect(worstAgainstIndexStep(join(dir, 'air.csv.rows.csv'), truth, 40 * SPF, 80 * SPF)).toBeLessThan(TOLERANCE_M);
    const summary = readJson<{ environmentLog: { readings: number; lastReadingS: number; error: string | null } }>(join(dir, 'air.json'));
    expect(summary.environmentLog).toMatchObject({ readings: 3, lastReadingS: 0.04, error: null });
  });

  it('refuses a log with no reading, and one given with fixed air conditions, before opening the port', async () => {
    const dir = ptys.dir();
    writeFileSync(join(dir, 'empty.csv'), 't,temperature,pressure,humidity\n');
    const empty = startCli(['listen', '--port', join(dir, 'no-port'), '--wavelength-nm', '632.9908', '--fold', '2', '--out', 'e.csv', '--environment-log', 'empty.csv'], dir);
    expect(await finished(empty)).toBe(1);
    expect(empty.output.stderr).toMatch(/empty\.csv.*at least one reading after the header/);
    expect(empty.output.stderr).not.toContain('listening on');
    writeFileSync(join(dir, 'one.csv'), 't,temperature,pressure,humidity\n0,20,101325,50\n');
    const both = startCli(['listen', '--port', join(dir, 'no-port'), '--wavelength-nm', '632.9908', '--fold', '2', '--out', 'b.csv', '--environment-log', 'one.csv',
      '--temperature-c', '20', '--pressure-pa', '101325', '--humidity-pct', '50'], dir);
    expect(await finished(both)).toBe(2);
    expect(both.output.stderr).toContain('give either --environment-log or fixed air conditions');
  });
});

describe('listen --environment-topic', () => {
  it('takes readings published to a topic on a real broker: later rows are scaled by the new index; a refused message and a broker outage change nothing', async () => {
    const dir = ptys.dir();
    const link = await ptys.pair();
    const broker = await startBroker();
    let brokerUp = true;
    try {
      const listen = startCli(
        ['listen', '--port', link.device, '--wavelength-nm', '632.9908', '--fold', '2', '--out', 'rows.csv', '--summary', 'summary.json', '--fit-samples', '1024',
          '--mqtt', broker.url, '--environment-topic', 'lab/air', '--temperature-c', '20', '--pressure-pa', '101325', '--humidity-pct', '50', '--serve', '127.0.0.1:0'],
        dir,
      );
      await listen.stderrHas('link up');
      await listen.stderrHas(/environment topic lab\/air: MQTT broker at \S+ connected/);
      const feedUrl = /\(feed (ws:\/\/127\.0\.0\.1:\d+\/feed)\)/.exec(listen.output.stderr)![1]!;
      const watcher = await openClient(feedUrl);
      watcher.send({ type: 'subscribe', updateHz: 50 });
      const processed = (frameCount: number) =>
        watcher.next((m) => m.type === 'update' && (m.sampleIndex as number) >= frameCount * SPF - 1, `positions up to frame ${frameCount}`);
      const emulator = emulatorOf();
      const truth: number[] = [];

      framesTo(link.firmware, emulator, truth, 40); // the starting air
      await processed(40);
      const sensor = await mqtt.connectAsync(broker.url, { reconnectPeriod: 0 });
      await sensor.publishAsync('lab/air', '{"temperatureC":"warm","pressurePa":80000,"relativeHumidityPct":50}', { qos: 1 });
      await listen.stderrHas('temperatureC must be a finite number (got "warm")');
      // Invented readings: 35 °C and 80 kPa from here on.
      await sensor.publishAsync('lab/air', '{"temperatureC":35,"pressurePa":80000,"relativeHumidityPct":50}', { qos: 1 });
      await sensor.endAsync();
      await listen.stderrHas(/environment topic lab\/air: reading at t = [\d.]+ s \(35 °C, 80000 Pa, 50 %\)/);
      framesTo(link.firmware, emulator, truth, 40);
      await processed(80);
      await broker.stop();
      brokerUp = false;
      await listen.stderrHas(/environment topic lab\/air: MQTT broker at \S+ unreachable .*the latest reading holds/);
      framesTo(link.firmware, emulator, truth, 20); // broker gone: the reading holds
      await processed(100);
      watcher.socket.close();
      listen.child.kill('SIGINT');
      expect(await finished(listen), listen.output.stderr).toBe(0);
      expect(listen.output.stderr).toMatch(/environment topic lab\/air: 1 reading\(s\) taken, 1 refused; 1 broker outage\(s\), [\d.]+ s without the broker: the latest reading held meanwhile/);

      // The reading arrived after frame 40 was processed and before frame 41 was written.
      expect(worstAgainstIndexStep(join(dir, 'rows.csv'), truth, 40 * SPF, 100 * SPF)).toBeLessThan(TOLERANCE_M);
      const summary = readJson<{ environmentTopic: Record<string, unknown> }>(join(dir, 'summary.json'));
      expect(summary.environmentTopic).toMatchObject({ topic: 'lab/air', readings: 1, rejected: 1, connected: false, connections: 1, outages: 1, latest: { temperatureC: 35, pressurePa: 80000, relativeHumidityPct: 50 } });
      // It took effect at the latest block before it came: within frame 40 or before.
      expect(summary.environmentTopic.lastReadingS as number).toBeGreaterThan(0);
      expect(summary.environmentTopic.lastReadingS as number).toBeLessThan(0.04);
    } finally {
      if (brokerUp) await broker.stop();
    }
  });

  it('is refused before the port opens without --mqtt or without the starting air conditions', async () => {
    const dir = ptys.dir();
    const base = ['listen', '--port', join(dir, 'no-port'), '--wavelength-nm', '632.9908', '--fold', '2', '--out', 'x.csv', '--environment-topic', 'lab/air'];
    const noBroker = startCli([...base, '--temperature-c', '20', '--pressure-pa', '101325', '--humidity-pct', '50'], dir);
    expect(await finished(noBroker)).toBe(2);
    expect(noBroker.output.stderr).toContain('--environment-topic reads from the broker of --mqtt');
    const noAir = startCli([...base, '--mqtt', 'mqtt://127.0.0.1:1'], dir);
    expect(await finished(noAir)).toBe(2);
    expect(noAir.output.stderr).toContain('--environment-topic needs the starting air conditions');
    expect(noAir.output.stderr).not.toContain('listening on');
  });
});
