// calibrate and replay with three detector outputs (--channels): a capture of a simulated three-output head with a
// drifting source (tests/support/detector-outputs.ts, invented), written by the test. Check values: the simulated
// motion itself; the layout it was made with.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fringetally, numbers, readCsv } from './cli.js';
import { detectorOutputs, UNBALANCED_THREE, wanderingPhase } from '../support/detector-outputs.js';
import { createRandom } from '../../src/core/index.js';

const common = ['--wavelength-nm', '632.9908', '--fold', '2', '--quiet'];
const NM_PER_RAD = 632.9908 / (2 * 2 * Math.PI);
const n = 12_000;
const phase = wanderingPhase(n, 25);
/** Source power: +4 % over the record and a 2 % wobble, as on the real recordings this feature was made for. */
const SIMULATED_POWER = Float64Array.from({ length: n }, (_, i) => 1 + 0.04 * (i / n) + 0.02 * Math.sin((2 * Math.PI * 1.3 * i) / n));
let dir = '';

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-channels-'));
  const { channels } = detectorOutputs(UNBALANCED_THREE, phase, { power: (i) => SIMULATED_POWER[i]!, noiseRms: 2e-4 });
  const rows = ['# rate_hz: 1000', 'ref,a,b,c', ...Array.from(phase, (p, i) => `${p.toFixed(9)},${channels.map((channel) => channel[i]!.toFixed(6)).join(',')}`)];
  writeFileSync(join(dir, 'three.csv'), rows.join('\n') + '\n');
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** Peak-to-peak of (measured − true) position in nm, the sign of the measured motion matched to the truth. */
function errorPeakToPeakNm(result: string): number {
  const position = numbers(readCsv(join(dir, result)).position_m!);
  const sense = Math.sign(position[n - 1]! - position[0]!) * Math.sign(phase[n - 1]! - phase[0]!);
  const errors = position.map((p, i) => sense * p * 1e9 - (phase[i]! - phase[0]!) * NM_PER_RAD);
  return Math.max(...errors) - Math.min(...errors);
}

describe('--channels', () => {
  it('calibrates three outputs, writes every output to a version 2 file, and replays far closer to the truth than a pair', async () => {
    const calibrated = await fringetally(['calibrate', 'three.csv', '--channels', 'a,b,c', '--out', 'three.json', '--report', 'three.html', ...common.slice(0, 4)], dir);
    expect(calibrated.code, calibrated.stderr).toBe(0);
    expect(calibrated.stderr).toMatch(/output 3 {4}c: offset/);
    expect(calibrated.stderr).toMatch(/source power 0\.9\d+ to 1\.0\d+/);
    const file = JSON.parse(readFileSync(join(dir, 'three.json'), 'utf8'));
    expect(file).toMatchObject({ format: 'fringetally-calibration', version: 2 });
    expect(file.offsetX).toBeUndefined();
    expect(file.layout.channels.map((channel: { name: string }) => channel.name)).toEqual(['a', 'b', 'c']);
    file.layout.channels.forEach((channel: { phaseRad: number }, k: number) => expect(channel.phaseRad).toBeCloseTo(UNBALANCED_THREE[k]!.phaseRad, 2));

    // Without --channels, replay reads the outputs the calibration names; columns by number count from 1 (ref).
    const replayed = await fringetally(['replay', 'three.csv', '--calibration', 'three.json', '--out', 'three.out.csv', ...common], dir);
    expect(replayed.code, replayed.stderr).toBe(0);
    const pairCal = await fringetally(['calibrate', 'three.csv', '--channels', 'a,3', '--out', 'pair.json', ...common], dir);
    expect(pairCal.code, pairCal.stderr).toBe(0);
    const pair = await fringetally(['replay', 'three.csv', '--channels', '2,b', '--calibration', 'pair.json', '--out', 'pair.out.csv', ...common], dir);
    expect(pair.code, pair.stderr).toBe(0);
    const three = errorPeakToPeakNm('three.out.csv');
    expect(three).toBeLessThan(0.3);
    expect(errorPeakToPeakNm('pair.out.csv') / three).toBeGreaterThan(10);

    // The source power is a reading of its own: a column after the level, the simulated power relative to its
    // mean over the calibration capture (this capture); a pair has no such column.
    const columns = readCsv(join(dir, 'three.out.csv'));
    const power = numbers(columns.power!);
    const meanPower = SIMULATED_POWER.reduce((sum, p) => sum + p, 0) / n;
    let worst = 0;
    power.forEach((p, i) => (worst = Math.max(worst, Math.abs(p - SIMULATED_POWER[i]! / meanPower))));
    expect(worst).toBeLessThan(2e-3);
    expect(Object.keys(columns)).toEqual(['t', 'position_m', 'velocity_m_s', 'level', 'power', 'alarms']);
    expect(Object.keys(readCsv(join(dir, 'pair.out.csv')))).not.toContain('power');

    // The residual analysis runs on the power-normalised pair: the 6 % power change leaves no radius drift there,
    // while the pair's radius follows the power.
    expect(file.residual.radiusDriftRelative).toBeLessThan(0.005);
    expect(calibrated.stderr).toMatch(/drift {7}mean radius moved by 0\.[0-4]\d\d %/);
    const pairFile = JSON.parse(readFileSync(join(dir, 'pair.json'), 'utf8'));
    expect(pairFile.residual.radiusDriftRelative).toBeGreaterThan(0.03);

    // The outputs are unipolar (every offset beyond its amplitude): "before" has no meaning and says why; "after" is
    // measured on the smooth wander (a cubic follows it over 512 samples) and finds the simulated head clean.
    expect(calibrated.stderr).toMatch(/before {2}not applicable: the signals are unipolar/);
    const after = /after {3}p-p (\d+\.\d+) nm/.exec(calibrated.stderr);
    expect(after, calibrated.stderr).not.toBeNull();
    expect(Number(after![1])).toBeLessThan(0.3);
    // The report draws no "before" curve for them, says why, and draws "after".
    const html = readFileSync(join(dir, 'three.html'), 'utf8');
    expect(html).toContain('<p>Before correction: not applicable: the signals are unipolar');
    expect(html).not.toContain('<path class="before"');
    expect(html).toContain('<path class="after"');
  });

  it('says why "after" cannot be measured on a wander no cubic follows, with how far it was', async () => {
    // A random walk of the phase (red, like a resting interferometer's thermal drift; invented), 3 outputs.
    const random = createRandom(12);
    const walk = new Float64Array(8192);
    for (let i = 1; i < walk.length; i++) walk[i] = walk[i - 1]! + 0.1 * random.gaussian();
    const { channels } = detectorOutputs(UNBALANCED_THREE, walk, { noiseRms: 2e-4 });
    const rows = ['# rate_hz: 1', 'a,b,c', ...Array.from(walk, (_, i) => channels.map((channel) => channel[i]!.toFixed(6)).join(','))];
    writeFileSync(join(dir, 'walk.csv'), rows.join('\n') + '\n');
    const result = await fringetally(['calibrate', 'walk.csv', '--channels', 'a,b,c', '--out', 'walk.json', '--report', 'walk.html', ...common.slice(0, 4)], dir);
    expect(result.code, result.stderr).toBe(0);
    const said = /after {3}not measurable on this motion: in every one of the (\d+) clean windows \(2 fringes of phase or 4096 samples each\) the motion departs from a cubic in time by at least (\d\.\d+) rad \((\d+\.\d+) nm\) RMS beyond the noise, more than the 0\.003 rad \(0\.15 nm\)/.exec(result.stderr);
    expect(said, result.stderr).not.toBeNull();
    expect(Number(said![1])).toBeGreaterThan(0);
    expect(Number(said![2])).toBeGreaterThan(0.003);
    expect(Number(said![3])).toBeCloseTo(Number(said![2]) * NM_PER_RAD, 1);
    const html = readFileSync(join(dir, 'walk.html'), 'utf8');
    expect(html).toContain('<p>After correction: not measurable on this motion:');
    expect(html).not.toContain('<path class="after"');
  });

  it('refuses a wrong number of outputs with the option that fixes it', async () => {
    const few = await fringetally(['replay', 'three.csv', '--channels', 'a', '--out', 'x.csv', ...common], dir);
    expect(few.code).toBe(2);
    expect(few.stderr).toContain('--channels takes 2 to 4 column names or 1-based numbers separated by commas (got "a")');
    const both = await fringetally(['calibrate', 'three.csv', '--channels', 'a,b,c', '--x-channel', 'a', '--out', 'x.json', ...common], dir);
    expect(both.stderr).toContain('give it or --x-channel/--y-channel, not both');
    await fringetally(['calibrate', 'three.csv', '--channels', 'a,b,c', '--out', 'mismatch.json', ...common], dir);
    const mismatch = await fringetally(['replay', 'three.csv', '--channels', 'a,b', '--calibration', 'mismatch.json', '--out', 'x.csv', ...common], dir);
    expect(mismatch.stderr).toContain('mismatch.json calibrates 3 detector outputs (a,b,c): give as many with --channels');
    const missing = await fringetally(['calibrate', 'three.csv', '--channels', 'a,b,d', '--out', 'x.json', ...common], dir);
    expect(missing.code).not.toBe(0);
    expect(missing.stderr).toContain('a column named "d" for option channels[2]');
  });
});
