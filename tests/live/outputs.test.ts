// Three detector outputs per axis end to end over a real pseudo-terminal pair (socat): `fringetally emulate
// --outputs 3` sends version 3 frames (channel layout: one axis of three outputs 120° apart) whose source power
// swings by ±20 %, `fringetally listen` with a calibration of those outputs tracks them. Positions are checked
// against the motion's formula (constant velocity from 0: x = v·t); the feed's status reports the layout.
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { WebSocket } from 'ws';
import { EMULATED_OUTPUTS } from '../../tools/live/frame-emulator.js';
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

const ptys = usePtyPairs('fringetally-outputs-');
const ptyPair = ptys.pair;
let dir = '';
beforeAll(() => {
  dir = ptys.dir();
  // The calibration of the emulated outputs (the layout emulate documents), as `calibrate --channels` writes it.
  const channels = EMULATED_OUTPUTS[3].map((channel, k) => ({ name: `d${k + 1}`, ...channel }));
  writeFileSync(join(dir, 'three.json'), JSON.stringify({ format: 'fringetally-calibration', version: 2, layout: { model: 'emulated', channels } }));
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

  it('without a calibration of three outputs, listen stops with exit 1 naming the fix', async () => {
    const { device, firmware } = await ptyPair();
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'fit.csv', '--duration', String(DURATION), '--fit-samples', '1000'], dir);
    await listen.stderrHas('link up');
    const emulate = startCli(emulateArgs(firmware), dir);
    expect(await finished(listen), listen.output.stderr).toBe(1);
    await finished(emulate).catch(() => undefined);
    expect(listen.output.stderr).toMatch(/the frames carry 3 detector outputs for axis 0: the live fit takes two; give a calibration of those outputs \(fringetally calibrate --channels\)/);
  });
});
