import { beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { refractiveIndexOfAir } from '../../src/core/metrology/index.js';

const root = fileURLToPath(new URL('../../', import.meta.url));
const tool = fileURLToPath(new URL('../../dist/tools/fringetally.js', import.meta.url));

interface Run {
  readonly status: number | null;
  readonly stdout: string;
  readonly stderr: string;
}

function fringetally(...args: string[]): Run {
  const result = spawnSync(process.execPath, [tool, ...args], { cwd: root, encoding: 'utf8' });
  return { status: result.status, stdout: result.stdout, stderr: result.stderr };
}

beforeAll(() => {
  // `npm test` builds before it runs the tests. Building here as well rewrote dist/ while other test files were
  // starting the tool from it, which now and then loaded a half-written module.
  if (!existsSync(fileURLToPath(new URL('../../dist/tools/commands/air.js', import.meta.url)))) {
    throw new Error('dist/tools/commands/air.js is missing: run the tests with `npm test`, which builds first');
  }
});

const standardArgs = ['--temperature-c', '20', '--pressure-pa', '101325', '--humidity-pct', '80', '--co2-ppm', '450', '--wavelength-nm', '633'];

describe('fringetally air', () => {
  it('--json prints n and wavelengthAirNm matching the check value', () => {
    // Third-party doc check value (docs/references.md): 20 °C, 80 % RH, 101325 Pa, 450 µmol/mol, 633 nm,
    // modified Edlén n = 1.0002711197635226; tolerance 1e-12 as in docs/references.md.
    const run = fringetally('air', ...standardArgs, '--equation', 'edlen', '--json');
    expect(run.status).toBe(0);
    const report = JSON.parse(run.stdout) as { n: number; wavelengthAirNm: number; equation: string; warnings: string[] };
    expect(Math.abs(report.n - 1.0002711197635226)).toBeLessThan(1e-12);
    expect(report.wavelengthAirNm).toBeCloseTo(633 / report.n, 12);
    expect(report.equation).toBe('edlen');
    expect(report.warnings).toEqual([]);
    expect(run.stderr).toBe('');
  });

  it('prints n and the wavelength in air as text, Ciddor by default', () => {
    const run = fringetally('air', ...standardArgs);
    expect(run.status).toBe(0);
    const expected = refractiveIndexOfAir({
      temperatureC: 20,
      pressurePa: 101_325,
      relativeHumidityPct: 80,
      co2Ppm: 450,
      vacuumWavelengthM: 633e-9,
    });
    expect(run.stdout).toContain('Ciddor 1996');
    expect(run.stdout).toContain(`refractive index n   ${expected.n.toFixed(12)}`);
    expect(run.stdout).toContain(`wavelength in air    ${(expected.airWavelengthM * 1e9).toFixed(7)} nm`);
  });

  it('accepts dew point and vapour pressure instead of relative humidity', () => {
    const byDew = JSON.parse(
      fringetally('air', '--temperature-c', '20', '--pressure-pa', '101325', '--dew-point-c', '10', '--wavelength-nm', '633', '--json').stdout,
    ) as { n: number; vapourPressurePa: number };
    const byVapour = JSON.parse(
      fringetally('air', '--temperature-c', '20', '--pressure-pa', '101325', '--vapour-pressure-pa', String(byDew.vapourPressurePa), '--wavelength-nm', '633', '--json').stdout,
    ) as { n: number };
    expect(byVapour.n).toBe(byDew.n);
    // Saturation over water at 10 °C: 1228 Pa (memory, humidity tables); tolerance 1 Pa.
    expect(Math.abs(byDew.vapourPressurePa - 1228)).toBeLessThan(1);
  });

  it('prints validity warnings on stderr and still answers; --strict turns them into an error', () => {
    const args = ['air', '--temperature-c', '60', '--pressure-pa', '101325', '--humidity-pct', '80', '--wavelength-nm', '633', '--equation', 'edlen'];
    const warned = fringetally(...args, '--json');
    expect(warned.status).toBe(0);
    expect(warned.stderr).toMatch(/^warning: temperatureC = 60 °C is outside the stated validity range/);
    // Third-party doc check value (docs/references.md) at 60 °C, 80 % RH; tolerance 1e-12.
    expect(Math.abs((JSON.parse(warned.stdout) as { n: number }).n - 1.0002339748542823)).toBeLessThan(1e-12);
    const strict = fringetally(...args, '--strict');
    expect(strict.status).toBe(2);
    expect(strict.stderr).toMatch(/--temperature-c must be in \[0, 40\] °C, the stated validity range .* \(got 60 °C\)/);
    expect(strict.stdout).toBe('');
  });

  it.each([
    [['--temperature-c', '20', '--pressure-pa', '101325', '--wavelength-nm', '633'], /give the humidity as one of --humidity-pct/],
    [[...standardArgs, '--dew-point-c', '5'], /give the humidity only once \(got --humidity-pct and --dew-point-c\)/],
    [['--pressure-pa', '101325', '--humidity-pct', '50', '--wavelength-nm', '633'], /--temperature-c is required/],
    [[...standardArgs, '--equation', 'ideal'], /--equation must be one of ciddor, edlen, shopfloor \(got "ideal"\)/],
    [['--temperature-c', '20', '--pressure-pa', '101325', '--humidity-pct', '120', '--wavelength-nm', '633'], /--humidity-pct takes the relative humidity in percent: 0 to 100 % \(got 120\)/],
    [['--temperature-c', 'warm', '--pressure-pa', '101325', '--humidity-pct', '50', '--wavelength-nm', '633'], /--temperature-c must be a finite number: the air temperature in degrees Celsius .*\(got "warm"\)/],
    [[...standardArgs, '--equation', 'shopfloor', '--wavelength-nm', '532'], /--wavelength-nm must be in \[632\.5, 633\.5\] nm for the shop-floor formula, which holds only for He-Ne 633 nm .*\(got 532 nm\)/],
  ])('rejects a wrong command line with exit code 2 (%#)', (args, message) => {
    const run = fringetally('air', ...args);
    expect(run.status).toBe(2);
    expect(run.stderr).toMatch(message);
    expect(run.stdout).toBe('');
  });

  it('shows units in --help', () => {
    const run = fringetally('air', '--help');
    expect(run.status).toBe(0);
    for (const unit of ['°C', 'Pa', '%', 'nm', 'µmol/mol']) expect(run.stdout).toContain(unit);
    expect(run.stdout).toContain('--dew-point-c');
    expect(run.stdout).toContain('--vapour-pressure-pa');
  });
});
