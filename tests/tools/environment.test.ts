// Environment, material and uncertainty on replay. Check values: n from the core's Ciddor implementation,
// itself checked against the third-party values in REFERENCES.md (tests/metrology); the steel coefficient
// 11.5e-6 /K (Swyt, J. Res. NIST 99(1), 31 (1994), published); L20 = L_T / (1 + α (T − 20)) (ISO 1, published).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { refractiveIndexOfAir } from '../../src/core/index.js';
import { fringetally, numbers, readCsv } from './cli.js';

let dir = '';
const common = ['--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'cal.json', '--quiet'];
const air = ['--temperature-c', '21.5', '--pressure-pa', '100500', '--humidity-pct', '40'];
const lastPosition = (file: string) => numbers(readCsv(join(dir, file)).position_m!).at(-1)!;

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-environment-'));
  expect((await fringetally(['simulate', '--out', 'cap.csv', '--duration-s', '0.01', '--quiet'], dir)).code).toBe(0);
  expect((await fringetally(['calibrate', 'cap.csv', '--out', 'cal.json', '--quiet'], dir)).code).toBe(0);
  expect((await fringetally(['replay', 'cap.csv', ...common, '--out', 'vacuum.csv'], dir)).code).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('replay in air', () => {
  it('scales the reading by 1/n of the stated air, and by the thermal normalisation of the material', async () => {
    const inAir = await fringetally(['replay', 'cap.csv', ...common, ...air, '--out', 'air.csv'], dir);
    expect(inAir.code, inAir.stderr).toBe(0);
    const n = refractiveIndexOfAir({ temperatureC: 21.5, pressurePa: 100500, relativeHumidityPct: 40, vacuumWavelengthM: 632.9908e-9 }).n;
    const vacuum = lastPosition('vacuum.csv');
    expect(Math.abs(vacuum)).toBeGreaterThan(1e-6);
    // Positions are written with 12 decimals (1 pm): the ratio is good to about 2 pm over the reading.
    const resolution = 2e-12 / Math.abs(vacuum);
    expect(Math.abs(lastPosition('air.csv') / vacuum - 1 / n)).toBeLessThan(resolution);
    const steel = await fringetally(['replay', 'cap.csv', ...common, ...air, '--material', 'steel', '--material-temperature-c', '23', '--out', 'steel.csv'], dir);
    expect(steel.code, steel.stderr).toBe(0);
    expect(Math.abs(lastPosition('steel.csv') / lastPosition('air.csv') - 1 / (1 + 11.5e-6 * 3))).toBeLessThan(resolution);
  });

  it('reads the same settings from a JSON config file; the command line wins', async () => {
    writeFileSync(join(dir, 'env.json'), JSON.stringify({ 'temperature-c': 21.5, 'pressure-pa': 100500, 'humidity-pct': 40, fold: 4 }));
    const configured = await fringetally(['replay', 'cap.csv', ...common, '--config', 'env.json', '--out', 'config.csv'], dir);
    expect(configured.code, configured.stderr).toBe(0);
    expect(readFileSync(join(dir, 'config.csv'), 'utf8')).toBe(readFileSync(join(dir, 'air.csv'), 'utf8'));
  });

  it('gives the final reading with its uncertainty, and the budget in the report', async () => {
    const result = await fringetally(['replay', 'cap.csv', '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'cal.json', ...air, '--out', 'u.csv', '--report', 'u.html'], dir);
    expect(result.code, result.stderr).toBe(0);
    expect(result.stderr).toMatch(/final position -?\d+\.\d+ µm ± \d+\.\d+ nm \(U, k = 2; u = \d+\.\d+ nm\)/);
    const html = readFileSync(join(dir, 'u.html'), 'utf8');
    expect(html).toContain('Uncertainty budget of the final reading');
    for (const row of ['vacuum wavelength', 'index equation', 'air temperature', 'air pressure', 'relative humidity', 'periodic error residual']) {
      expect(html).toContain(`<td>${row}</td>`);
    }
    const withoutAir = await fringetally(['replay', 'cap.csv', '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'cal.json', '--out', 'v.csv', '--report', 'v.html'], dir);
    expect(withoutAir.stderr).toMatch(/the vacuum wavelength is used \(n = 1\)/);
    expect(readFileSync(join(dir, 'v.html'), 'utf8')).toContain('No environment given: no uncertainty budget');
  });

  it('refuses contradictory or incomplete environment options', async () => {
    const both = await fringetally(['replay', 'cap.csv', ...common, ...air, '--refractive-index', '1.0003', '--out', 'x.csv'], dir);
    expect(both.code).toBe(2);
    expect(both.stderr).toContain('give either --refractive-index or the air conditions, not both');
    const noPressure = await fringetally(['replay', 'cap.csv', ...common, '--temperature-c', '20', '--humidity-pct', '40', '--out', 'x.csv'], dir);
    expect(noPressure.code).toBe(2);
    expect(noPressure.stderr).toContain('--temperature-c and --pressure-pa');
  });
});
