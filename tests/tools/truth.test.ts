// replay --truth: the result compared with the true position of an invented scenario written by simulate, or with
// any CSV of t and position_m; and simulate's own account of its scenario (peak speed, overspeed note, metadata).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fringetally, readCsv } from './cli.js';

let dir = '';
const optics = ['--wavelength-nm', '632.9908', '--fold', '2'];
/** A figure from the summary's "error     max X nm, RMS Y nm" line. */
function figure(text: string, label: 'max' | 'RMS'): number {
  const [, max, rms] = /error +max (-?[\d.]+) nm, RMS (-?[\d.]+) nm/.exec(text)!;
  return Number(label === 'max' ? max : rms);
}

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-truth-'));
  // Invented scenario: trapezoidal moves with reversals, noise-free detectors with an imperfect ellipse.
  expect((await fringetally(['simulate', '--out', 'clean.csv', '--duration-s', '0.03', '--noise', '0', '--adc', 'none', '--quiet'], dir)).code).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('replay --truth', () => {
  it('reports maximum, RMS and periodic error against the truth in the summary and the report', async () => {
    const run = await fringetally(['replay', 'clean.csv', ...optics, '--out', 'r.csv', '--truth', 'clean.truth.csv', '--report', 'r.html'], dir);
    expect(run.code, run.stderr).toBe(0);
    expect(run.stderr).toContain('against the truth clean.truth.csv (30000 samples):');
    // Noise-free, fitted ellipse, under the speed limit: the count is exact and the error far below a nanometre.
    expect(figure(run.stderr, 'max')).toBeLessThan(0.05);
    expect(figure(run.stderr, 'RMS')).toBeLessThan(0.05);
    expect(run.stderr).toMatch(/periodic {2}p-p \d+\.\d{3} nm, 1st harmonic/);
    const html = readFileSync(join(dir, 'r.html'), 'utf8');
    expect(html).toContain('error against the truth');
    expect(html).toContain('periodic error against the truth');
  });

  it('takes any CSV with t and position_m, interpolating between its samples', async () => {
    const truth = readCsv(join(dir, 'clean.truth.csv'));
    // Every tenth sample only, and no other columns: the rest is interpolated.
    const rows = ['t,position_m', ...truth.t!.filter((_, k) => k % 10 === 0).map((t, k) => `${t},${truth.position_m![k * 10]}`)];
    writeFileSync(join(dir, 'sparse.csv'), rows.join('\n') + '\n');
    const run = await fringetally(['replay', 'clean.csv', ...optics, '--out', 'r2.csv', '--truth', 'sparse.csv'], dir);
    expect(run.code, run.stderr).toBe(0);
    // Samples after the truth's last time are not compared.
    expect(run.stderr).toMatch(/against the truth sparse\.csv \(2999\d samples\)/);
    // The trapezoid's corners fall between truth samples: linear interpolation errs there by at most a·Δt²/8.
    expect(figure(run.stderr, 'max')).toBeLessThan(0.05 + (20 * 1e-5 ** 2) / 8 * 1e9);
  });

  it('names the truth file and what it lacks', async () => {
    writeFileSync(join(dir, 'no-position.csv'), 't,x\n0,1\n1e-6,2\n');
    const run = await fringetally(['replay', 'clean.csv', ...optics, '--out', 'r3.csv', '--truth', 'no-position.csv'], dir);
    expect(run.code).toBe(1);
    expect(run.stderr).toMatch(/no-position\.csv line 1: expected a column named "position_m"/);
    const missing = await fringetally(['replay', 'clean.csv', ...optics, '--out', 'r3.csv', '--truth', 'nothing.csv'], dir);
    expect(missing.code).toBe(1);
    expect(missing.stderr).toContain('nothing.csv: no such file (--truth)');
  });
});

describe('simulate tells the truth about its scenario', () => {
  it('warns beyond the speed limit as emulate does, and reports the true peak speed with overspeed windows', async () => {
    const fast = await fringetally(['simulate', '--out', 'fast.csv', '--motion', 'constant', '--velocity-m-s', '0.5', '--duration-s', '0.001'], dir);
    expect(fast.code).toBe(0);
    // At 1 MHz and fold 2, λ f_s / (2N) = 0.1582 m/s (docs/references.md); a quarter fringe per sample is half of it.
    expect(fast.stderr).toContain('peak speed 0.5000 m/s (unambiguous limit 0.1582 m/s)');
    expect(fast.stderr).toMatch(/note: peak speed 0\.5000 m\/s is above a quarter fringe per sample \(0\.07912 m\/s\): a replay will raise overspeed and lose count/);
    const windowed = await fringetally(['simulate', '--out', 'window.csv', '--motion', 'constant', '--velocity-m-s', '0.01', '--overspeed', '0.0002:0.0001:0.2', '--duration-s', '0.001'], dir);
    expect(windowed.stderr).toContain('peak speed 0.2100 m/s');
    const slow = await fringetally(['simulate', '--out', 'slow.csv', '--duration-s', '0.001'], dir);
    expect(slow.stderr).not.toContain('note: peak speed');
  });

  it('writes the metadata as given, without binary-float tails', async () => {
    expect((await fringetally(['simulate', '--out', 'meta.csv', '--wavelength-nm', '632.9908', '--refractive-index', '1.00027', '--duration-s', '0.0001', '--quiet'], dir)).code).toBe(0);
    const head = readFileSync(join(dir, 'meta.csv'), 'utf8').split('\n').slice(0, 8).join('\n');
    expect(head).toContain('# wavelength_nm: 632.9908\n');
    expect(head).toContain('# refractive_index: 1.00027\n');
  });
});
