// `fringetally angles` on invented position files of three axes: angles and the point of interest beside the
// positions, hand-worked in the small-angle convention; files that were not recorded together are refused.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fringetally, numbers, readCsv } from './cli.js';

let dir = '';
/** Invented: three axes moving 1 mm over 1000 rows at 1 kHz, two of them 2 µm and 1 µm further by the end. */
const extra = [0, 2e-6, 1e-6];
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-angles-'));
  extra.forEach((e, k) => {
    const rows = ['t,position_m,velocity_m_s,level,alarms'];
    for (let i = 0; i < 1000; i++) rows.push(`${(i / 1000).toFixed(3)},${((1e-3 + e) * (i / 1000)).toFixed(12)},0,1,`);
    writeFileSync(join(dir, `axis${k + 1}.csv`), rows.join('\n') + '\n');
  });
  writeFileSync(join(dir, 'short.csv'), 't,position_m\n0,0\n0.001,0\n');
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('fringetally angles', () => {
  it('writes yaw, pitch and the point of interest beside the positions', async () => {
    const result = await fringetally(
      ['angles', 'axis1.csv', 'axis2.csv', 'axis3.csv', '--beam', '0,0', '--beam', '100,0', '--beam', '0,100', '--point', '200,50', '--model', 'small-angle', '--u-reading-nm', '1', '--out', 'rows.csv'],
      dir,
    );
    expect(result.code, result.stderr).toBe(0);
    const rows = readCsv(join(dir, 'rows.csv'));
    expect(Object.keys(rows)).toEqual(['t', 'position_m_1', 'position_m_2', 'position_m_3', 'yaw_rad', 'pitch_rad', 'point_m', 'u_yaw_rad', 'u_pitch_rad', 'u_point_m']);
    const last = 999;
    const f = last / 1000;
    // Hand-worked (z_k = d − ψ x_k + θ y_k): d = 1 mm·f, ψ = −2 µm·f / 100 mm = −2e-5·f, θ = 1 µm·f / 100 mm = 1e-5·f;
    // the point at (200 mm, 50 mm) reads d + 2e-5·f·0.2 + 1e-5·f·0.05 = d + 4.5 µm·f.
    expect(numbers(rows.yaw_rad!)[last]).toBeCloseTo(-2e-5 * f, 11);
    expect(numbers(rows.pitch_rad!)[last]).toBeCloseTo(1e-5 * f, 11);
    expect(numbers(rows.point_m!)[last]).toBeCloseTo(1e-3 * f + 4.5e-6 * f, 11);
    expect(numbers(rows.position_m_2!)[last]).toBeCloseTo((1e-3 + 2e-6) * f, 12);
    // Beams at (0,0), (100,0), (0,100) mm, 1 nm each: u(ψ) = √2 nm / 100 mm (the slope is z2 − z1 over 100 mm).
    expect(numbers(rows.u_yaw_rad!)[last]).toBeCloseTo(Math.SQRT2 * 1e-8, 14);
  });

  it('gives one angle from two beams and refuses files of different lengths or a missing --beam', async () => {
    const two = await fringetally(['angles', 'axis1.csv', 'axis2.csv', '--beam', '-50,0', '--beam', '50,0', '--out', 'two.csv', '--every', '100'], dir);
    expect(two.code, two.stderr).toBe(0);
    const rows = readCsv(join(dir, 'two.csv'));
    expect(rows.t!.length).toBe(10);
    expect(rows.pitch_rad!.every((cell) => cell === '')).toBe(true);
    const short = await fringetally(['angles', 'axis1.csv', 'short.csv', '--beam', '0,0', '--beam', '100,0', '--out', 'x.csv'], dir);
    expect(short.code).toBe(1);
    expect(short.stderr).toMatch(/short\.csv ends after 2 rows, before the other files: the axes must be recorded together/);
    const missing = await fringetally(['angles', 'axis1.csv', 'axis2.csv', '--beam', '0,0', '--out', 'x.csv'], dir);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toMatch(/give one --beam X,Y per file \(2 files, 1 --beam\)/);
    const diagonal = await fringetally(['angles', 'axis1.csv', 'axis2.csv', '--beam', '0,0', '--beam', '100,100', '--out', 'x.csv'], dir);
    expect(diagonal.stderr).toMatch(/beams must be two beams apart in x only \(yaw\) or in y only \(pitch\)/);
  });
});
