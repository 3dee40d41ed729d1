// Environment, material and uncertainty on replay. Check values: n from the core's Ciddor implementation,
// itself checked against the third-party values in docs/references.md (tests/metrology); the steel coefficient
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

  it('--environment-log: the index follows the logged air through the run, rescaling each row, never the count', async () => {
    // Invented log: the air warms from 20 to 40 °C over the 10 ms capture (1 MHz, 10 000 samples).
    writeFileSync(join(dir, 'air.log'), '# invented\nt,temperature,pressure,humidity\n0,20,101325,50\n0.01,40,101325,50\n');
    const logged = await fringetally(['replay', 'cap.csv', ...common, '--environment-log', 'air.log', '--out', 'logged.csv'], dir);
    expect(logged.code, logged.stderr).toBe(0);
    const indexAt = (tS: number) =>
      refractiveIndexOfAir({ temperatureC: 20 + 2000 * Math.min(Math.max(tS, 0), 0.01), pressurePa: 101325, relativeHumidityPct: 50, vacuumWavelengthM: 632.9908e-9 }).n;
    const vacuum = numbers(readCsv(join(dir, 'vacuum.csv')).position_m!);
    const rows = readCsv(join(dir, 'logged.csv'));
    const positions = numbers(rows.position_m!);
    const times = numbers(rows.t!);
    // Each row carries 1/n of a time within one block (4096 samples) of its own: the index is set per block.
    const block = 4096e-6;
    let checked = 0;
    for (let i = 0; i < positions.length; i += 97) {
      if (Math.abs(vacuum[i]!) < 1e-7) continue;
      const ratio = positions[i]! / vacuum[i]!;
      const resolution = 2e-12 / Math.abs(vacuum[i]!);
      expect(ratio).toBeGreaterThanOrEqual(1 / indexAt(times[i]! - block) - resolution);
      expect(ratio).toBeLessThanOrEqual(1 / indexAt(times[i]! + block) + resolution);
      checked++;
    }
    expect(checked).toBeGreaterThan(50);
    // Warmer air at the end: a lower index and a larger reading than at the start, by about 2e-5 relative.
    const endRatio = positions.at(-1)! / vacuum.at(-1)!;
    expect(endRatio - 1 / indexAt(0)).toBeGreaterThan(1e-5);
  });

  it('--environment-log: refuses a malformed log with its line, and fixed air conditions beside it', async () => {
    writeFileSync(join(dir, 'bad.log'), 't,temperature,pressure,humidity\n0,20,101325,50\n0.005,warm,101325,50\n');
    const bad = await fringetally(['replay', 'cap.csv', ...common, '--environment-log', 'bad.log', '--out', 'x.csv'], dir);
    expect(bad.code).toBe(1);
    expect(bad.stderr).toContain('bad.log line 3: expected a finite number for temperature, got "warm"');
    writeFileSync(join(dir, 'back.log'), 't,temperature,pressure,humidity,co2\n0,20,101325,50,420\n0,21,101325,50,420\n');
    const back = await fringetally(['replay', 'cap.csv', ...common, '--environment-log', 'back.log', '--out', 'x.csv'], dir);
    expect(back.stderr).toContain('back.log line 3: expected t greater than the line before (0 s), got "0"');
    const both = await fringetally(['replay', 'cap.csv', ...common, ...air, '--environment-log', 'air.log', '--out', 'x.csv'], dir);
    expect(both.code).toBe(2);
    expect(both.stderr).toContain('give either --environment-log or fixed air conditions');
  });
});
