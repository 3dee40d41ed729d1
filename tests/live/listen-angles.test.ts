// Angles in live rows, end to end over a real pseudo-terminal pair (socat): `fringetally emulate --axes 3` sends
// three axes of one invented motion scaled 1×, 2×, 3× (axis k carries (k + 1) times it), `fringetally listen` with
// one --beam per axis writes yaw, pitch and the point of interest beside the positions, and the feed carries them.
// Check values are hand-worked small-angle geometry (axis k reads d − ψ·x_k + θ·y_k, docs/analysis.md) with beams
// at (0, 0), (10, 0) and (0, 10) mm: ψ = (r1 − r2)/10 mm, θ = (r3 − r1)/10 mm, the point (5, 5) mm reads
// r1 − 5 mm·ψ + 5 mm·θ = (r2 + r3)/2; with r_k = k·v·t that is ψ = −100·v·t, θ = 200·v·t (rad/m), point
// 2.5·v·t. Uncertainties (GUM, uncorrelated readings of u = 1 nm): u(ψ) = u(θ) = √2·u/10 mm, u(point) = u·√(1/4 + 1/4).
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { WebSocket } from 'ws';
import { until } from '../serial/wait.js';
import { fringetally } from '../tools/cli.js';
import { finished, readJson, readRows, startCli, usePtyPairs } from './processes.js';

const RATE = 100_000;
const DURATION = 0.2;
const VELOCITY = 0.001;
const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
const GEOMETRY = ['--beam', '0,0', '--beam', '10,0', '--beam', '0,10', '--point', '5,5', '--model', 'small-angle', '--u-reading-nm', '1'];
/** As in tests/live/live.test.ts: noise of 20 counts on a 12 000-count radius, about 0.1 nm RMS per axis; 2 nm allowed. */
const POSITION_TOLERANCE_M = 2e-9;
/** Rounding of the rows: positions to 1e-12 m, angles to 1e-12 rad. */
const ROUNDING = 1e-12;

const ptys = usePtyPairs('fringetally-angles-');
let dir = '';
beforeAll(() => {
  dir = ptys.dir();
  // The detectors' exact ellipse (emulate's defaults, the same on every axis).
  writeFileSync(
    join(dir, 'exact.json'),
    JSON.stringify({ format: 'fringetally-calibration', version: 1, offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 }),
  );
});

interface Update {
  type: string;
  axes: { name: string; positionM: number | null }[];
  geometry?: { yawRad: number | null; pitchRad: number | null; pointM: number | null };
}

describe('listen with several axes and their geometry', () => {
  it('rows carry yaw, pitch and the point of interest beside the three positions, on the hand-worked geometry; the feed carries them too', async () => {
    const { device, firmware } = await ptys.pair();
    const listen = startCli(
      ['listen', '--port', device, ...OPTICS, '--calibration', 'exact.json', '--out', 'angles.csv', '--summary', 'angles.json', '--duration', String(DURATION),
        '--serve', '127.0.0.1:0', ...GEOMETRY],
      dir,
    );
    await listen.stderrHas('link up');
    await listen.stderrHas(/feed ws:\S+\)/);
    const updates: Update[] = [];
    let subscribed = false;
    const socket = new WebSocket(/feed (ws:\S+)\)/.exec(listen.output.stderr)![1]!);
    socket.on('message', (data) => {
      const message = JSON.parse(String(data)) as Update;
      if (message.type === 'update') updates.push(message);
      if (message.type === 'subscribed') subscribed = true;
    });
    socket.on('open', () => socket.send(JSON.stringify({ type: 'subscribe', updateHz: 50 })));
    await until(() => subscribed, 'the feed to confirm the subscription');
    const emulate = startCli(
      ['emulate', '--port', firmware, '--rate-hz', String(RATE), '--velocity-m-s', String(VELOCITY), ...OPTICS, '--duration', String(DURATION),
        '--samples-per-frame', '100', '--include-rate', '--axes', '3', '--quiet'],
      dir,
    );
    expect(await finished(emulate), emulate.output.stderr).toBe(0);
    expect(await finished(listen), listen.output.stderr).toBe(0);
    socket.close();
    expect(listen.output.stderr).toContain('axes X1..X3 (frame axes 0..2): yaw and pitch and the point of interest in the rows');
    expect(readJson<{ rowsWritten: number }>(join(dir, 'angles.json')).rowsWritten).toBe(RATE * DURATION);

    const { columns, alarms } = readRows(join(dir, 'angles.csv'));
    const { t, position_m_1: r1, position_m_2: r2, position_m_3: r3, yaw_rad: yaw, pitch_rad: pitch, point_m: point } = columns;
    expect(Object.keys(columns)).toEqual(['t', 'position_m_1', 'position_m_2', 'position_m_3', 'yaw_rad', 'pitch_rad', 'point_m', 'u_yaw_rad', 'u_pitch_rad', 'u_point_m', 'alarms']);
    expect(t).toHaveLength(RATE * DURATION);
    expect(alarms.every((text) => text === '')).toBe(true);
    for (let i = 0; i < t!.length; i++) {
      const travel = (VELOCITY * i) / RATE;
      expect(Math.abs(r1![i]! - travel)).toBeLessThan(POSITION_TOLERANCE_M);
      expect(Math.abs(r2![i]! - 2 * travel)).toBeLessThan(POSITION_TOLERANCE_M);
      expect(Math.abs(r3![i]! - 3 * travel)).toBeLessThan(POSITION_TOLERANCE_M);
      // From the row's own positions (rounded to 1 pm) by the hand-worked formulas.
      expect(Math.abs(yaw![i]! - (r1![i]! - r2![i]!) / 0.01)).toBeLessThan((3 * ROUNDING) / 0.01);
      expect(Math.abs(pitch![i]! - (r3![i]! - r1![i]!) / 0.01)).toBeLessThan((3 * ROUNDING) / 0.01);
      expect(Math.abs(point![i]! - (r2![i]! + r3![i]!) / 2)).toBeLessThan(3 * ROUNDING);
      // Against the motion: yaw −100·v·t, pitch 200·v·t (rad per m of travel), point 2.5·v·t.
      expect(Math.abs(yaw![i]! + 100 * travel)).toBeLessThan((2 * POSITION_TOLERANCE_M) / 0.01);
      expect(Math.abs(pitch![i]! - 200 * travel)).toBeLessThan((2 * POSITION_TOLERANCE_M) / 0.01);
      expect(Math.abs(point![i]! - 2.5 * travel)).toBeLessThan(2 * POSITION_TOLERANCE_M);
    }
    expect(columns.u_yaw_rad![0]).toBeCloseTo((Math.SQRT2 * 1e-9) / 0.01, 13);
    expect(columns.u_pitch_rad![0]).toBeCloseTo((Math.SQRT2 * 1e-9) / 0.01, 13);
    expect(columns.u_point_m![0]).toBeCloseTo(1e-9 * Math.sqrt(0.5), 14);

    // Feed updates: the three axes and their geometry, solved from the same update's positions.
    // How many updates come depends on the machine's pace; every one must hold the geometry of its positions.
    const live = updates.filter((update) => update.axes[0]!.positionM !== null);
    expect(live.length).toBeGreaterThan(0);
    for (const update of live) {
      expect(update.axes.map((axis) => axis.name)).toEqual(['X1', 'X2', 'X3']);
      const [p1, p2, p3] = update.axes.map((axis) => axis.positionM!) as [number, number, number];
      expect(update.geometry!.yawRad!).toBeCloseTo((p1 - p2) / 0.01, 10);
      expect(update.geometry!.pitchRad!).toBeCloseTo((p3 - p1) / 0.01, 10);
      expect(update.geometry!.pointM!).toBeCloseTo((p2 + p3) / 2, 15);
    }
  });

  it('geometry options are checked before the port opens', async () => {
    const base = ['listen', '--port', '/dev/null', ...OPTICS, '--out', 'x.csv'];
    const cases: [string[], RegExp][] = [
      [['--beam', '0,0'], /--beam: beams\.length must be an integer in 2\.\.8 \(got 1\)/],
      [['--beam', '0,0', '--beam', '10,0', '--axis', '1'], /--axis picks one axis; with --beam listen tracks axes 0\.\.N−1/],
      [['--beam', '0,0', '--beam', '10'], /--beam expects 2 numbers in mm/],
      [['--beam', '0,0', '--beam', '0,0'], /--beam: /],
      [['--beam', '0,0', '--beam', '10,0', '--format', 'jsonl', '--out', 'x.jsonl'], /rows with angles \(--beam\) are CSV/],
      [['--point', '1,2'], /--point, --model and --u-\* describe the geometry of --beam axes: give one --beam per axis/],
    ];
    for (const [args, message] of cases) {
      const result = await fringetally([...base, ...args], dir);
      expect(result.code, args.join(' ')).toBe(2);
      expect(result.stderr).toMatch(message);
    }
  });
});
