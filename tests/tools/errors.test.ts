// Bad input stops with an error naming the file, the line or byte offset and what was expected, exit non-zero,
// and no output is passed off as complete.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdtempSync, readdirSync, rmSync, writeFileSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fringetally } from './cli.js';

let dir = '';
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-errors-'));
  expect((await fringetally(['simulate', '--out', 'good.csv', '--duration-s', '0.01', '--quiet'], dir)).code).toBe(0);
  expect((await fringetally(['simulate', '--out', 'good.wav', '--duration-s', '0.01', '--quiet'], dir)).code).toBe(0);
  expect((await fringetally(['calibrate', 'good.csv', '--out', 'cal.json', '--quiet'], dir)).code).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const replay = (capture: string, out: string) =>
  fringetally(['replay', capture, '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'cal.json', '--out', out, '--quiet'], dir);

describe('bad captures', () => {
  it('a malformed row names the file and the line; the result file is not left behind', async () => {
    const lines = readFileSync(join(dir, 'good.csv'), 'utf8').split('\n');
    const bad = lines.findIndex((line) => /^-?\d+,-?\d+$/.test(line)) + 6000;
    lines[bad] = '123,abc';
    writeFileSync(join(dir, 'bad-row.csv'), lines.join('\n'));
    const result = await replay('bad-row.csv', 'bad-row.out.csv');
    expect(result.code).toBe(1);
    expect(result.stderr).toContain(`bad-row.csv line ${bad + 1}`);
    expect(result.stderr).toMatch(/expected/);
    expect(existsSync(join(dir, 'bad-row.out.csv'))).toBe(false);
    expect(readdirSync(dir).filter((name) => name.includes('partial'))).toEqual([]);
  });

  it('a truncated WAV names the byte offset', async () => {
    const bytes = readFileSync(join(dir, 'good.wav'));
    writeFileSync(join(dir, 'cut.wav'), bytes.subarray(0, bytes.length - 1001));
    const result = await replay('cut.wav', 'cut.out.csv');
    expect(result.code).toBe(1);
    expect(result.stderr).toMatch(/cut\.wav.*byte/);
    expect(existsSync(join(dir, 'cut.out.csv'))).toBe(false);
  });

  it('an unknown format is refused with the file named', async () => {
    writeFileSync(join(dir, 'noise.bin'), Buffer.from([0, 1, 2, 3, 255, 254, 0, 0, 7]));
    const result = await replay('noise.bin', 'noise.out.csv');
    expect(result.code).toBe(1);
    expect(result.stderr).toContain('noise.bin');
  });

  it('a broken calibration file names the file and the field', async () => {
    writeFileSync(join(dir, 'bad-cal.json'), JSON.stringify({ format: 'fringetally-calibration', version: 1, offsetX: 0, offsetY: 0, amplitudeX: -3, amplitudeY: 1, phaseErrorRad: 0 }));
    const result = await fringetally(['replay', 'good.csv', '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'bad-cal.json', '--out', 'x.csv'], dir);
    expect(result.code).toBe(1);
    expect(result.stderr).toContain('bad-cal.json: calibration.amplitudeX must be a positive finite number (got -3)');
  });

  it('wrong command lines exit 2 with the rule broken', async () => {
    const noFold = await fringetally(['replay', 'good.csv', '--wavelength-nm', '632.9908', '--out', 'x.csv'], dir);
    expect(noFold.code).toBe(2);
    expect(noFold.stderr).toContain('--fold is required');
    const badEvery = await fringetally(['replay', 'good.csv', '--wavelength-nm', '632.9908', '--fold', '2', '--every', '0', '--out', 'x.csv'], dir);
    expect(badEvery.code).toBe(2);
  });
});

describe('help', () => {
  it('every subcommand has --help with units', async () => {
    const overview = await fringetally(['--help'], dir);
    for (const command of ['simulate', 'calibrate', 'replay', 'air', 'spectrum', 'positioning', 'angles', 'demo']) {
      expect(overview.stdout).toContain(command);
      const help = await fringetally([command, '--help'], dir);
      expect(help.code).toBe(0);
      expect(help.stdout).toMatch(/Usage: fringetally/);
    }
    const replayHelp = (await fringetally(['replay', '--help'], dir)).stdout;
    for (const unit of ['nm', 'm/s', 'Hz', 'position_m']) expect(replayHelp).toContain(unit);
    expect(replayHelp).toMatch(/never a safety interlock/);
  });
});
