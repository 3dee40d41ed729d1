// Inputs in the user's terms, through the command line: physical ranges with the unit named, negative numbers as
// values, --config keys checked, exit code 2 for a wrong command line and 1 for a failed run, missing inputs
// reported before any work, and outputs that would overwrite an input refused.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createHash } from 'node:crypto';
import { linkSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fringetally } from './cli.js';

let dir = '';
const optics = ['--wavelength-nm', '632.9908', '--fold', '2'];
const hash = (name: string) => createHash('sha256').update(readFileSync(join(dir, name))).digest('hex');

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-inputs-'));
  expect((await fringetally(['simulate', '--out', 'cap.csv', '--duration-s', '0.005', '--quiet'], dir)).code).toBe(0);
  expect((await fringetally(['calibrate', 'cap.csv', '--out', 'cal.json', '--quiet'], dir)).code).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('physical ranges, in the unit the option takes', () => {
  it('refuses a wavelength in metres given to a nanometre option, in every command that takes one', async () => {
    const commands = [
      ['replay', 'cap.csv', '--wavelength-nm', '632.9908e-9', '--fold', '2', '--out', 'r.csv'],
      ['simulate', '--out', 'w.csv', '--wavelength-nm', '632.9908e-9'],
      ['calibrate', 'cap.csv', '--out', 'c.json', '--wavelength-nm', '0.6329908'],
      ['emulate', '--port', join(dir, 'no-port'), '--rate-hz', '1000', '--fold', '2', '--velocity-m-s', '0.001', '--wavelength-nm', '1e6'],
      ['air', '--temperature-c', '20', '--pressure-pa', '101325', '--humidity-pct', '50', '--wavelength-nm', '632.9908e-9'],
    ];
    for (const args of commands) {
      const run = await fringetally(args, dir);
      expect(run.code, args.join(' ')).toBe(2);
      // The optical range 150 nm to 20 µm, in the option's own unit, with the text as typed.
      expect(run.stderr).toMatch(/--wavelength-nm takes the vacuum wavelength in nanometres .*: 150 to 20000 nm \(got (632\.9908e-9|0\.6329908|1e6)\)/);
    }
    expect(readdirSync(dir).filter((name) => name.startsWith('w.') || name.startsWith('r.') || name === 'c.json')).toEqual([]);
  });

  it('names kelvin typed as °C, hPa typed as Pa and degrees typed as radians by their own option', async () => {
    const kelvin = await fringetally(['air', '--temperature-c', '293.15', '--pressure-pa', '101325', '--humidity-pct', '50', '--wavelength-nm', '633'], dir);
    expect(kelvin.code).toBe(2);
    expect(kelvin.stderr).toContain('--temperature-c takes the air temperature in degrees Celsius (20 °C is 293.15 K): -80 to 150 °C (got 293.15)');
    expect(kelvin.stderr).not.toMatch(/pressure/);
    const hpa = await fringetally(['air', '--temperature-c', '20', '--pressure-pa', '1013.25', '--humidity-pct', '50', '--wavelength-nm', '633'], dir);
    expect(hpa.stderr).toContain('--pressure-pa takes the air pressure in pascals (101325 Pa = 1013.25 hPa)');
    const degrees = await fringetally(['simulate', '--out', 'd.csv', '--phase-error-rad', '3.4'], dir);
    expect(degrees.code).toBe(2);
    expect(degrees.stderr).toContain('--phase-error-rad takes the quadrature error in radians (0.06 rad = 3.4°): -1.5 to 1.5 rad (got 3.4)');
  });

  it('says errors from the core in the option’s words and units, at sensible digits', async () => {
    const shopfloor = await fringetally(['air', '--temperature-c', '20', '--pressure-pa', '101325', '--humidity-pct', '50', '--wavelength-nm', '532', '--equation', 'shopfloor'], dir);
    expect(shopfloor.code).toBe(2);
    expect(shopfloor.stderr).toContain('--wavelength-nm must be in [632.5, 633.5] nm for the shop-floor formula');
    expect(shopfloor.stderr).toContain('(got 532 nm)');
    expect(shopfloor.stderr).not.toMatch(/vacuumWavelengthM|e-7/);
    const vapour = await fringetally(['air', '--temperature-c', '20', '--pressure-pa', '101325', '--vapour-pressure-pa', '5000', '--wavelength-nm', '633'], dir);
    expect(vapour.code).toBe(2);
    expect(vapour.stderr).toMatch(/--vapour-pressure-pa must be .*\[0, 2339\.\d+\] Pa \(got 5000 Pa\)/);
  });
});

describe('negative numbers are ordinary values', () => {
  it('takes --temperature-c -5, --dew-point-c -10, --velocity-m-s -0.01 and --offset-y -500 as written', async () => {
    const cold = await fringetally(['air', '--temperature-c', '-5', '--pressure-pa', '101325', '--dew-point-c', '-10', '--wavelength-nm', '633', '--json'], dir);
    expect(cold.code, cold.stderr).toBe(0);
    expect((JSON.parse(cold.stdout) as { temperatureC: number }).temperatureC).toBe(-5);
    const backwards = await fringetally(['simulate', '--out', 'back.csv', '--motion', 'constant', '--velocity-m-s', '-0.01', '--offset-y', '-500', '--duration-s', '0.001', '--quiet'], dir);
    expect(backwards.code, backwards.stderr).toBe(0);
    const truth = readFileSync(join(dir, 'back.truth.csv'), 'utf8').trim().split('\n');
    expect(Number(truth[truth.length - 1]!.split(',')[1])).toBeLessThan(0); // it moved backwards
  });
});

describe('--config', () => {
  it('names an unknown key with the closest known one, and a bad value with its file and key', async () => {
    writeFileSync(join(dir, 'typo.json'), JSON.stringify({ 'temprature-c': 20.3, 'pressure-pa': 101200, 'humidity-pct': 45 }));
    const typo = await fringetally(['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'r.csv', '--config', 'typo.json'], dir);
    expect(typo.code).toBe(2);
    expect(typo.stderr).toContain('--config typo.json: unknown key "temprature-c" (did you mean "temperature-c"?)');
    writeFileSync(join(dir, 'kelvin.json'), JSON.stringify({ 'temperature-c': 293.45, 'pressure-pa': 101200, 'humidity-pct': 45 }));
    const kelvin = await fringetally(['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'r.csv', '--config', 'kelvin.json'], dir);
    expect(kelvin.code).toBe(2);
    expect(kelvin.stderr).toContain('"temperature-c" in --config kelvin.json takes the air temperature in degrees Celsius');
    expect(readdirSync(dir)).not.toContain('r.csv');
  });

  it('names a misspelt option and a misspelt material with the closest one', async () => {
    const option = await fringetally(['replay', 'cap.csv', '--wavelenght-nm', '633', '--fold', '2', '--out', 'r.csv'], dir);
    expect(option.code).toBe(2);
    expect(option.stderr).toContain('unknown option --wavelenght-nm (did you mean --wavelength-nm?)');
    const material = await fringetally(['replay', 'cap.csv', ...optics, '--out', 'r.csv', '--material', 'fe-ni', '--material-temperature-c', '21'], dir);
    expect(material.code).toBe(2);
    expect(material.stderr).toMatch(/--material must be one of .*fe-ni36.* \(got "fe-ni"\); did you mean fe-ni36\?/);
  });
});

describe('files checked before any work', () => {
  it('reports a missing or unreadable capture at once, naming the path (exit 1)', async () => {
    const missing = await fringetally(['replay', 'nowhere.csv', ...optics, '--out', 'r.csv'], dir);
    expect(missing.code).toBe(1);
    expect(missing.stderr).toBe('fringetally replay: nowhere.csv: no such file (the capture)\n'); // nothing before it: no "fitting"
    mkdirSync(join(dir, 'folder.csv'), { recursive: true });
    const folder = await fringetally(['calibrate', 'folder.csv', '--out', 'c.json'], dir);
    expect(folder.code).toBe(1);
    expect(folder.stderr).toContain('folder.csv: is a folder, not a file (the capture)');
    const calibration = await fringetally(['replay', 'cap.csv', ...optics, '--calibration', 'missing-cal.json', '--out', 'r.csv'], dir);
    expect(calibration.code).toBe(1);
    expect(calibration.stderr).toContain('missing-cal.json: no such file (--calibration)');
  });

  it('refuses an output that is an input or another output, however it is named (exit 2, the input intact)', async () => {
    const before = hash('cap.csv');
    symlinkSync(join(dir, 'cap.csv'), join(dir, 'cap-link.csv'));
    linkSync(join(dir, 'cap.csv'), join(dir, 'cap-hard.csv'));
    const clashes = [
      ['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'cap.csv'],
      ['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', './cap.csv'],
      ['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'cap-link.csv'],
      ['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'cap-hard.csv'],
      ['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'r.csv', '--report', 'cap.csv'],
      ['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'r.csv', '--report', 'r.csv'],
      ['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'cal.json', '--format', 'csv'],
      ['calibrate', 'cap.csv', '--out', 'cap.csv'],
      ['calibrate', 'cap.csv', '--out', 'c.json', '--report', 'cap.csv'],
    ];
    for (const args of clashes) {
      const run = await fringetally(args, dir);
      expect(run.code, args.join(' ')).toBe(2);
      expect(run.stderr).toMatch(/is the same file as (the capture cap\.csv|--out r\.csv|--calibration cal\.json): refusing to overwrite it/);
    }
    expect(hash('cap.csv')).toBe(before);
    const simulate = await fringetally(['simulate', '--out', 'same.csv', '--truth', 'same.csv'], dir);
    expect(simulate.code).toBe(2);
    expect(simulate.stderr).toContain('--truth same.csv is the same file as --out same.csv');
    expect(readdirSync(dir).filter((name) => name.startsWith('same') || name.includes('partial'))).toEqual([]);
  });

  it('refuses a folder as an output before any work, leaving nothing behind', async () => {
    mkdirSync(join(dir, 'results.csv'), { recursive: true });
    const run = await fringetally(['replay', 'cap.csv', ...optics, '--calibration', 'cal.json', '--out', 'results.csv'], dir);
    expect(run.code).toBe(2);
    expect(run.stderr).toContain('--out results.csv: is a folder; give a file name');
    expect(readdirSync(join(dir, 'results.csv'))).toEqual([]);
    expect(readdirSync(dir).filter((name) => name.includes('partial'))).toEqual([]);
  });
});
