// End to end over real pseudo-terminal pairs (socat): `fringetally emulate` writes frames of an invented motion,
// `fringetally listen` tracks it. Positions are compared with emulate's truth file; each injected fault must show
// in the right counters and alarms. socat is required: missing, these tests fail.
import { existsSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import mqtt from 'mqtt';
import { WebSocket } from 'ws';
import { refractiveIndexOfAir } from '../../src/core/index.js';
import { startBroker, type Broker } from '../feed/broker.js';
import { requireSocat, startPtyPair, type PtyPair } from '../serial/socat.js';
import { fringetally } from '../tools/cli.js';
import { finished, killAll, readJson, readRows, startCli } from './processes.js';

const RATE = 100_000;
const SPF = 100;
const DURATION = 0.5; // 50 000 samples, 500 frames (0..499)
const VELOCITY = 0.001; // 32 samples per fringe at fold 2: far from the overspeed alarm
const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
/**
 * Largest |listen − truth| accepted, m. The emulated noise (20 counts RMS on a 12 000-count radius, ~1.7 mrad)
 * gives about 0.1 nm RMS of position; the live fit's residual periodic error adds a fraction of a nanometre
 * (common practice: an ellipse fit takes the nonlinearity to the sub-nanometre level). 2 nm leaves a margin,
 * while a single missed fringe (316 nm) or a scale wrong by 0.1 % (500 nm over the 500 µm travelled) fails.
 */
const POSITION_TOLERANCE_M = 2e-9;

interface ListenSummary {
  stopReason: string;
  samplesDelivered: number;
  samplesProcessed: number;
  rowsWritten: number;
  countLostAtEnd: boolean;
  wire: { framesGood: number; crcFailures: number; resyncs: number; bytesSkipped: number; gaps: number; lostSamples: number; headerRejects: number };
  text: { linesGood: number; linesMalformed: number } | null;
  gaps: { sampleIndex: number; lostSamples: number; cause: string }[];
  lostSamples: number;
  link: { outages: number; returns: number };
  alarmsRaised: Record<string, number>;
}
interface EmulateSummary {
  framesMade: number;
  framesSent: number;
  samplesMade: number;
  dropped: number[];
  corrupted: number[];
  garbage: { beforeFrame: number; bytes: number }[];
  pauses: { afterFrame: number; ms: number }[];
}

let dir = '';
let run = 0;
const pairs: PtyPair[] = [];

beforeAll(() => {
  requireSocat();
  dir = mkdtempSync(join(tmpdir(), 'fringetally-live-'));
});
afterEach(async () => {
  await killAll();
  await Promise.all(pairs.splice(0).map((pair) => pair.stop()));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function ptyPair(): Promise<{ device: string; firmware: string }> {
  run++;
  const device = join(dir, `device-${run}`);
  const firmware = join(dir, `firmware-${run}`);
  pairs.push(await startPtyPair(device, firmware));
  return { device, firmware };
}

/** Files of this run: result, summary, truth, emulator summary. */
function files(tag: string) {
  return { out: `${tag}.csv`, summary: `${tag}.summary.json`, truth: `${tag}.truth.csv`, emulated: `${tag}.emulate.json`, record: `${tag}.record.csv` };
}

/**
 * listen (started first, waits for the link) then emulate for DURATION; both must end by themselves. listen's
 * --duration counts samples received: a run that loses frames gives the frames that arrive (`framesReceived`).
 */
async function emulateIntoListen(tag: string, emulateArgs: readonly string[], listenArgs: readonly string[] = [], framesReceived = (RATE * DURATION) / SPF) {
  const { device, firmware } = await ptyPair();
  const f = files(tag);
  const listen = startCli(
    ['listen', '--port', device, ...OPTICS, '--out', f.out, '--summary', f.summary, '--duration', String((framesReceived * SPF) / RATE), '--record', f.record, ...listenArgs],
    dir,
  );
  await listen.stderrHas('link up');
  const emulate = startCli(
    ['emulate', '--port', firmware, '--rate-hz', String(RATE), '--velocity-m-s', String(VELOCITY), ...OPTICS, '--duration', String(DURATION),
      '--samples-per-frame', String(SPF), '--include-rate', '--truth', f.truth, '--summary', f.emulated, '--quiet', ...emulateArgs],
    dir,
  );
  expect(await finished(emulate), emulate.output.stderr).toBe(0);
  expect(await finished(listen), listen.output.stderr).toBe(0);
  return {
    listen,
    summary: readJson<ListenSummary>(join(dir, f.summary)),
    emulated: readJson<EmulateSummary>(join(dir, f.emulated)),
    rows: readRows(join(dir, f.out)),
    truth: readRows(join(dir, f.truth)).columns,
    record: readRows(join(dir, f.record)).columns,
  };
}

/** Largest |position − truth| over rows whose sample index is below `beforeIndex`. */
function worstError(rows: ReturnType<typeof readRows>, truth: Record<string, number[]>, beforeIndex = Infinity, scale = 1): number {
  let worst = 0;
  const { t, position_m: position } = rows.columns;
  for (let r = 0; r < t!.length; r++) {
    const index = Math.round(t![r]! * RATE);
    if (index >= beforeIndex) break;
    worst = Math.max(worst, Math.abs(position![r]! - scale * truth.position_m![index]!));
  }
  return worst;
}

describe('emulate → pty → listen', () => {
  it('recovers the emulated motion: every sample, positions within 2 nm of the truth, no alarm, nothing lost', async () => {
    const { summary, emulated, rows, truth, record } = await emulateIntoListen('clean', []);
    expect(emulated.samplesMade).toBe(RATE * DURATION);
    expect(summary).toMatchObject({ stopReason: 'duration', samplesProcessed: RATE * DURATION, rowsWritten: RATE * DURATION, countLostAtEnd: false, lostSamples: 0 });
    expect(summary.wire).toMatchObject({ framesGood: 500, crcFailures: 0, resyncs: 0, bytesSkipped: 0, gaps: 0 });
    expect(rows.alarms.every((alarms) => alarms === '')).toBe(true);
    expect(rows.columns.t![0]).toBe(0);
    expect(worstError(rows, truth)).toBeLessThan(POSITION_TOLERANCE_M);
    // Final position against velocity × time of the last sample (constant motion from 0).
    expect(rows.columns.position_m!.at(-1)!).toBeCloseTo(VELOCITY * (RATE * DURATION - 1) / RATE, 8);
    expect(record.x).toHaveLength(RATE * DURATION);
  });

  it('garbage between frames: resyncs and skipped bytes counted exactly, no gap, no alarm on the data', async () => {
    const { summary, emulated, rows, truth } = await emulateIntoListen('garbage', ['--garbage-every', '10', '--garbage-bytes', '16']);
    expect(emulated.garbage).toHaveLength(49);
    expect(summary.wire.resyncs).toBe(emulated.garbage.length);
    expect(summary.wire.bytesSkipped).toBe(16 * emulated.garbage.length);
    expect(summary.wire.framesGood).toBe(500);
    expect(summary.gaps).toEqual([]);
    expect(rows.alarms.every((alarms) => alarms === '')).toBe(true);
    expect(worstError(rows, truth)).toBeLessThan(POSITION_TOLERANCE_M);
  });

  it('dropped frames: one input gap per frame with its lost samples at the right index, then count_lost', async () => {
    const { summary, emulated, rows, truth } = await emulateIntoListen('drop', ['--drop-every', '47'], [], 490);
    const dropped = emulated.dropped;
    expect(dropped).toEqual([46, 93, 140, 187, 234, 281, 328, 375, 422, 469]);
    expect(summary.gaps).toEqual(dropped.map((frame) => ({ sampleIndex: (frame + 1) * SPF, lostSamples: SPF, cause: 'sequence' })));
    expect(summary.wire).toMatchObject({ gaps: dropped.length, lostSamples: dropped.length * SPF, crcFailures: 0 });
    expect(summary.samplesProcessed).toBe(RATE * DURATION - dropped.length * SPF);
    expect(summary.alarmsRaised.input_gap).toBe(dropped.length);
    expect(summary.alarmsRaised.count_lost).toBe(1);
    expect(summary.countLostAtEnd).toBe(true);
    const indices = rows.columns.t!.map((t) => Math.round(t * RATE));
    const firstGapRow = indices.indexOf((dropped[0]! + 1) * SPF);
    expect(rows.alarms[firstGapRow]).toBe('input_gap count_lost');
    expect(rows.alarms.slice(0, firstGapRow).every((alarms) => alarms === '')).toBe(true);
    expect(rows.alarms.slice(firstGapRow).every((alarms) => alarms.includes('count_lost'))).toBe(true);
    // The missing samples are absent, not invented: no row carries the index of a dropped sample.
    expect(indices.includes(dropped[0]! * SPF + 10)).toBe(false);
    expect(worstError(rows, truth, dropped[0]! * SPF)).toBeLessThan(POSITION_TOLERANCE_M);
  });

  it('CRC errors: counted, the damaged frame skipped, and a gap of its samples', async () => {
    const { summary, emulated } = await emulateIntoListen('crc', ['--corrupt-every', '43'], [], 489);
    const corrupted = emulated.corrupted;
    expect(corrupted).toHaveLength(11);
    expect(summary.wire.crcFailures).toBe(corrupted.length);
    expect(summary.wire.framesGood).toBe(500 - corrupted.length);
    expect(summary.gaps).toEqual(corrupted.map((frame) => ({ sampleIndex: (frame + 1) * SPF, lostSamples: SPF, cause: 'sequence' })));
    expect(summary.alarmsRaised.input_gap).toBe(corrupted.length);
    expect(summary.countLostAtEnd).toBe(true);
  });

  it('pauses: late data is not lost data: no gap, no alarm, positions on the truth', async () => {
    const { summary, emulated, rows, truth } = await emulateIntoListen('pause', ['--pause-every', '100', '--pause-ms', '150']);
    expect(emulated.pauses.map((pause) => pause.afterFrame)).toEqual([99, 199, 299, 399]);
    expect(summary).toMatchObject({ samplesProcessed: RATE * DURATION, lostSamples: 0, countLostAtEnd: false });
    expect(summary.gaps).toEqual([]);
    expect(rows.alarms.every((alarms) => alarms === '')).toBe(true);
    expect(worstError(rows, truth)).toBeLessThan(POSITION_TOLERANCE_M);
  });

  it('text lines, second axis of a two-axis stream: recovers twice the motion of axis 0', async () => {
    const { device, firmware } = await ptyPair();
    const f = files('text');
    const rate = 20_000;
    const listen = startCli(
      ['listen', '--port', device, ...OPTICS, '--out', f.out, '--summary', f.summary, '--duration', '0.5', '--text', '--rate-hz', String(rate),
        '--axis', '1', '--fit-samples', '4096'],
      dir,
    );
    await listen.stderrHas('link up');
    const emulate = startCli(
      ['emulate', '--port', firmware, '--rate-hz', String(rate), '--velocity-m-s', '0.0003', ...OPTICS, '--duration', '0.5', '--samples-per-frame', '50',
        '--text', '--axes', '2', '--truth', f.truth, '--quiet'],
      dir,
    );
    expect(await finished(emulate), emulate.output.stderr).toBe(0);
    expect(await finished(listen), listen.output.stderr).toBe(0);
    const summary = readJson<ListenSummary>(join(dir, f.summary));
    expect(summary.text).toMatchObject({ linesGood: 10_000, linesMalformed: 0 });
    const rows = readRows(join(dir, f.out));
    const truth = readRows(join(dir, f.truth)).columns;
    let worst = 0;
    rows.columns.t!.forEach((t, r) => {
      worst = Math.max(worst, Math.abs(rows.columns.position_m![r]! - 2 * truth.position_m![Math.round(t * rate)]!));
    });
    expect(worst).toBeLessThan(POSITION_TOLERANCE_M);
    expect(rows.columns.position_m!.at(-1)).toBeCloseTo(2 * 0.0003 * (10_000 - 1) / rate, 8);
  });

  it('the writer vanishing and coming back: link down, link up, a marked gap, count_lost; files closed cleanly on SIGINT', async () => {
    const { device, firmware } = await ptyPair();
    const f = files('link');
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', f.out, '--summary', f.summary, '--retry-ms', '20'], dir);
    await listen.stderrHas('link up');
    const emulateArgs = ['--rate-hz', String(RATE), '--velocity-m-s', String(VELOCITY), ...OPTICS, '--samples-per-frame', String(SPF), '--include-rate', '--quiet'];
    const first = startCli(['emulate', '--port', firmware, ...emulateArgs, '--summary', f.emulated], dir);
    await listen.stderrHas('fitted the correction');
    first.child.kill('SIGTERM');
    expect(await finished(first)).toBe(0);
    const sent = readJson<EmulateSummary>(join(dir, f.emulated)).framesMade;
    await pairs.pop()!.stop();
    // serialport alone misses this outage (a zero-byte read retried forever); the serial source's watchdog closes the port.
    await listen.stderrHas('link down');
    pairs.push(await startPtyPair(device, firmware));
    await listen.stderrHas('link up (opened): samples were lost');
    // The device kept counting while away: 5 frames it made were never received.
    const second = startCli(['emulate', '--port', firmware, ...emulateArgs, '--duration', '0.2', '--start-sequence', String((sent + 5) % 65536)], dir);
    await listen.stderrHas('(link outage)');
    expect(await finished(second)).toBe(0);
    listen.child.kill('SIGINT');
    expect(await finished(listen), listen.output.stderr).toBe(0);

    const summary = readJson<ListenSummary>(join(dir, f.summary));
    expect(summary.stopReason).toBe('signal');
    expect(summary.link).toMatchObject({ outages: 1, returns: 1 });
    expect(summary.gaps).toHaveLength(1);
    const gap = summary.gaps[0]!;
    expect(gap.cause).toBe('link');
    // The 5 frames never sent, plus whatever was in flight when the pty died (bytes in the terminal buffers, a
    // half-received frame): the counter tells all of it, so the first sample after the gap has the absolute index
    // it had at the device, (sequence of its frame) × samples per frame, with frames counted from 0.
    expect(gap.sampleIndex).toBe((sent + 5) * SPF);
    expect(gap.lostSamples % SPF).toBe(0);
    expect(gap.lostSamples).toBeGreaterThanOrEqual(5 * SPF);
    expect(summary.countLostAtEnd).toBe(true);
    const rows = readRows(join(dir, f.out));
    const gapRow = rows.columns.t!.findIndex((t) => Math.round(t * RATE) === gap.sampleIndex);
    expect(gapRow).toBeGreaterThan(0);
    // The restarted device's motion starts again from its own zero, so the phase may also jump (overspeed) there.
    expect(rows.alarms[gapRow]).toMatch(/(^| )input_gap count_lost$/);
    expect(rows.alarms.slice(0, gapRow).every((alarms) => alarms === '')).toBe(true);
    expect(rows.alarms.slice(gapRow).every((alarms) => alarms.includes('count_lost'))).toBe(true);
    expect(listen.output.stderr).toMatch(/link down \((disconnected|vanished: the device node is gone or was replaced)\)/);
    expect(readdirSync(dir).filter((name) => name.includes('partial'))).toEqual([]);
  });
});

describe('listen and emulate errors', () => {
  it('frames without a rate and no --rate-hz: exit 1 naming the fix, no result file left', async () => {
    const { device, firmware } = await ptyPair();
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'norate.csv'], dir);
    await listen.stderrHas('link up');
    startCli(['emulate', '--port', firmware, '--rate-hz', '10000', '--velocity-m-s', '0.001', ...OPTICS, '--duration', '0.2', '--quiet'], dir);
    expect(await finished(listen)).toBe(1);
    expect(listen.output.stderr).toMatch(/the frames carry no sample rate field: give --rate-hz/);
    expect(existsSync(join(dir, 'norate.csv'))).toBe(false);
    expect(readdirSync(dir).filter((name) => name.includes('norate'))).toEqual([]);
  });

  it('usage errors exit 2 and name the option; --help states the units and the laser caution', async () => {
    const noPort = await fringetally(['listen', ...OPTICS, '--out', 'x.csv'], dir);
    expect(noPort.code).toBe(2);
    expect(noPort.stderr).toMatch(/--port is required/);
    const noFormat = await fringetally(['listen', '--port', '/dev/null', ...OPTICS, '--out', 'x.txt'], dir);
    expect(noFormat.code).toBe(2);
    expect(noFormat.stderr).toMatch(/cannot tell the result format/);
    const badEvery = await fringetally(['emulate', '--port', '/dev/null', '--rate-hz', '1000', '--velocity-m-s', '0', ...OPTICS, '--drop-every=-1'], dir);
    expect(badEvery.code).toBe(2);
    expect(badEvery.stderr).toMatch(/--drop-every must be an integer/);
    const textFaults = await fringetally(['emulate', '--port', '/dev/null', '--rate-hz', '1000', '--velocity-m-s', '0', ...OPTICS, '--text', '--corrupt-every', '3'], dir);
    expect(textFaults.code).toBe(2);
    for (const command of ['listen', 'emulate']) {
      const help = await fringetally([command, '--help'], dir);
      expect(help.code).toBe(0);
      expect(help.stdout).toMatch(/Hz/);
      expect(help.stdout).toMatch(/nm/);
      expect(help.stdout).toMatch(/never a safety interlock/);
    }
  });

  it('beyond the ellipse: a stale calibration is logged as calibration_stale, and the file\'s harmonics are applied', async () => {
    // emulate's detectors (docs/live.md): offsets 800, −500, amplitudes 12 000, 10 800, quadrature error 0.06 rad.
    // A calibration 10 % too large in both amplitudes keeps the phase but reads a radius of 1/1.1: beyond the
    // watch's ±5 % bound. Its harmonic correction of 0.02 rad at order 1 moves each position by −0.02·cos φ rad of
    // phase, at most 0.02 × 25.19 nm/rad = 0.504 nm (633 nm, fold 2), against the same run without it.
    const ellipse = { format: 'fringetally-calibration', version: 1, offsetX: 800, offsetY: -500, amplitudeX: 13200, amplitudeY: 11880, phaseErrorRad: 0.06 };
    writeFileSync(join(dir, 'stale.json'), JSON.stringify(ellipse));
    writeFileSync(join(dir, 'stale-harmonics.json'), JSON.stringify({ ...ellipse, harmonics: { orders: 1, cos: [0.02], sin: [0] } }));
    const plain = await emulateIntoListen('stale', [], ['--calibration', 'stale.json']);
    expect(plain.listen.output.stderr).toMatch(/calibration_stale at t = [\d.]+ s: the signal left the calibration's model \(the mean radius moved by -9\.\d\d %\)/);
    const corrected = await emulateIntoListen('stale-harmonics', [], ['--calibration', 'stale-harmonics.json']);
    const a = plain.rows.columns.position_m!;
    const b = corrected.rows.columns.position_m!;
    expect(b).toHaveLength(a.length);
    let largest = 0;
    for (let i = 0; i < a.length; i++) largest = Math.max(largest, Math.abs(b[i]! - a[i]!));
    expect(largest / (0.02 * (632.9908e-9 / (4 * Math.PI)))).toBeCloseTo(1, 2);
  });

  it('emulate on a port that does not exist: exit 1 naming the path', async () => {
    const result = await fringetally(['emulate', '--port', join(dir, 'missing-port'), '--rate-hz', '1000', '--velocity-m-s', '0.001', ...OPTICS, '--duration', '0.1'], dir);
    expect(result.code).toBe(1);
    expect(result.stderr).toMatch(/missing-port: cannot open the port/);
  });
});

describe('listen with a feed and the environment', () => {
  it('serves the WebSocket feed while listening in air: the feed follows the motion, rows are scaled by 1/n', async () => {
    const { device, firmware } = await ptyPair();
    const air = ['--temperature-c', '21', '--pressure-pa', '100000', '--humidity-pct', '40'];
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'served.csv', '--duration', '1', '--serve', '127.0.0.1:0', ...air], dir);
    await listen.stderrHas('link up');
    const emulate = startCli(
      ['emulate', '--port', firmware, '--rate-hz', String(RATE), '--velocity-m-s', String(VELOCITY), ...OPTICS, '--duration', '1',
        '--samples-per-frame', String(SPF), '--include-rate', '--truth', 'served.truth.csv', '--quiet'],
      dir,
    );
    await listen.stderrHas(/feed ws:\S+\)/);
    const feedUrl = /feed (ws:\S+)\)/.exec(listen.output.stderr)![1]!;
    expect(feedUrl).toMatch(/^ws:\/\/127\.0\.0\.1:\d+\/feed$/);
    const updates: { sampleIndex: number; positionM: number | null }[] = [];
    const socket = new WebSocket(feedUrl);
    // The feed sends updates once a client subscribes (docs/feed.md): ask for 20 per second.
    socket.on('open', () => socket.send(JSON.stringify({ type: 'subscribe', updateHz: 20 })));
    socket.on('message', (data) => {
      const message = JSON.parse(String(data)) as { type: string; axes?: { sampleIndex: number; positionM: number | null }[] };
      if (message.type === 'update') updates.push(message.axes![0]!);
    });
    expect(await finished(emulate), emulate.output.stderr).toBe(0);
    expect(await finished(listen), listen.output.stderr).toBe(0);
    socket.close();
    const n = refractiveIndexOfAir({ temperatureC: 21, pressurePa: 100000, relativeHumidityPct: 40, vacuumWavelengthM: 632.9908e-9 }).n;
    expect(listen.output.stderr).toContain(`refractive index of air ${n.toFixed(10)}`);
    expect(listen.output.stderr).toMatch(/final position [\d.]+ µm ± [\d.]+ nm \(U, k = 2/);
    const rows = readRows(join(dir, 'served.csv'));
    const truth = readRows(join(dir, 'served.truth.csv')).columns;
    expect(worstError(rows, truth, Infinity, 1 / n)).toBeLessThan(POSITION_TOLERANCE_M);
    // The feed's updates follow the same scaled motion (its zero is the stream's first sample here).
    const live = updates.filter((u) => u.positionM !== null && u.sampleIndex > 0);
    expect(live.length).toBeGreaterThan(2);
    for (const update of live) expect(Math.abs(update.positionM! - truth.position_m![update.sampleIndex]! / n)).toBeLessThan(POSITION_TOLERANCE_M);
  });

  it('publishes to an MQTT broker over TLS with a login, the password from the environment', async () => {
    const broker: Broker = await startBroker({ users: { stage: 'correct horse battery' }, tls: true });
    try {
      const { device, firmware } = await ptyPair();
      const login = ['--mqtt', broker.url, '--mqtt-ca', broker.caFile!, '--mqtt-username', 'stage', '--mqtt-topic', 'lab/bench2'];
      const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'mqtt.csv', '--duration', '1', ...login], dir, {
        FRINGETALLY_MQTT_PASSWORD: 'correct horse battery',
      });
      await listen.stderrHas('link up');
      const emulate = startCli(
        ['emulate', '--port', firmware, '--rate-hz', String(RATE), '--velocity-m-s', String(VELOCITY), ...OPTICS, '--duration', '1',
          '--samples-per-frame', String(SPF), '--include-rate', '--truth', 'mqtt.truth.csv', '--quiet'],
        dir,
      );
      expect(await finished(emulate), emulate.output.stderr).toBe(0);
      expect(await finished(listen), listen.output.stderr).toBe(0);
      expect(listen.output.stderr).toContain('publishing to MQTT topics lab/bench2/axis/X');
      // Both messages are retained: a subscriber that comes after the run still gets the last update and the
      // offline status (the last will, or the publisher's own goodbye).
      const client = await mqtt.connectAsync(broker.url, { ca: broker.ca!, username: 'stage', password: 'correct horse battery', reconnectPeriod: 0 });
      const received = new Map<string, Record<string, unknown>>();
      const both = new Promise<void>((resolve) =>
        client.on('message', (topic, payload) => {
          received.set(topic, JSON.parse(payload.toString()) as Record<string, unknown>);
          if (received.size === 2) resolve();
        }),
      );
      await client.subscribeAsync(['lab/bench2/axis/X', 'lab/bench2/status']);
      await both;
      await client.endAsync();
      expect(received.get('lab/bench2/status')).toMatchObject({ state: 'offline' });
      const last = received.get('lab/bench2/axis/X') as { sampleIndex: number; positionM: number };
      const truth = readRows(join(dir, 'mqtt.truth.csv')).columns;
      expect(last.sampleIndex).toBeGreaterThan(RATE / 2);
      expect(Math.abs(last.positionM - truth.position_m![last.sampleIndex]!)).toBeLessThan(POSITION_TOLERANCE_M);
    } finally {
      await broker.stop();
    }
  });

  it('MQTT options: each needs its partner, TLS files need mqtts://, and a missing password is named', async () => {
    const base = ['listen', '--port', '/dev/null', ...OPTICS, '--format', 'csv', '--out', '-'];
    const cases: [string[], RegExp][] = [
      [['--mqtt-ca', 'ca.pem'], /--mqtt-ca applies to --mqtt/],
      [['--mqtt', 'mqtt://127.0.0.1:1', '--mqtt-username', 'stage'], /--mqtt-username needs --mqtt-password or the environment variable FRINGETALLY_MQTT_PASSWORD/],
      [['--mqtt', 'mqtt://127.0.0.1:1', '--mqtt-cert', 'c.pem'], /--mqtt-cert and --mqtt-key go together/],
      [['--mqtt', 'mqtts://127.0.0.1:1', '--mqtt-ca', 'absent.pem'], /--mqtt-ca absent\.pem: cannot read the PEM file \(ENOENT\)/],
    ];
    for (const [extra, message] of cases) {
      const result = await fringetally([...base, ...extra], dir);
      expect(result.code, result.stderr).toBe(2);
      expect(result.stderr).toMatch(message);
    }
  });
});
