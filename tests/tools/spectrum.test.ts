// `fringetally spectrum` end to end on invented captures: the periodic error of a deliberately wrong correction
// shows as a line at the fringe frequency of its known size, in the CSV and marked in the report; a replay result
// file gives the same analysis as the raw capture.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fringetally, numbers, readCsv } from './cli.js';

let dir = '';
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-spectrum-'));
  // Invented: a circle of radius 12000 counts offset by 120 counts in x (ε = 0.01), 5 mm/s for 0.1 s.
  const simulated = await fringetally(
    ['simulate', '--out', 'cap.wav', '--motion', 'constant', '--velocity-m-s', '0.005', '--duration-s', '0.1', '--offset-x', '120', '--offset-y', '0',
      '--amplitude-x', '12000', '--amplitude-y', '12000', '--phase-error-rad', '0', '--noise', '5', '--quiet'],
    dir,
  );
  expect(simulated.code, simulated.stderr).toBe(0);
  // A correction that ignores the offset, so that the periodic error stays in the positions.
  const circle = { format: 'fringetally-calibration', version: 1, offsetX: 0, offsetY: 0, amplitudeX: 12000, amplitudeY: 12000, phaseErrorRad: 0 };
  writeFileSync(join(dir, 'circle.json'), JSON.stringify(circle));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const fringeHz = (2 * 0.005) / 632.9908e-9; // N·v/λ (docs/references.md, common practice): 15 798.0 Hz

describe('fringetally spectrum', () => {
  it('shows the once-per-fringe error of an uncorrected offset as a line of the expected size, and marks it', async () => {
    const result = await fringetally(
      ['spectrum', 'cap.wav', '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'circle.json', '--segment', '8192', '--out', 's.csv', '--allan-out', 'a.csv', '--report', 'r.html'],
      dir,
    );
    expect(result.code, result.stderr).toBe(0);
    const text = readFileSync(join(dir, 's.csv'), 'utf8');
    const first = Number(/# periodic-error line 1: ([0-9.e+-]+) Hz/.exec(text)![1]);
    expect(first).toBeCloseTo(fringeHz, 3);
    const columns = readCsv(join(dir, 's.csv'));
    const f = numbers(columns.frequency_hz!);
    const asd = numbers(columns.asd_nm_per_rthz!);
    const binHz = f[1]! - f[0]!;
    const at = Math.round(first / binHz);
    let power = 0;
    for (let k = at - 3; k <= at + 3; k++) power += asd[k]! ** 2 * binHz;
    // docs/references.md (derived from Heydemann's model): an offset ε·R gives a once-per-fringe phase error of ε rad,
    // ε = 120/12000 = 0.01 rad, that is 0.01 · 316.4954 nm / 2π = 0.5037 nm amplitude, 0.3562 nm RMS. The ε²
    // terms and the noise move it by well under 1 %.
    expect(Math.abs(Math.sqrt(power) / (0.01 * (316.4954 / (2 * Math.PI)) / Math.SQRT2) - 1)).toBeLessThan(0.01);
    const cumulative = numbers(columns.cumulative_rms_nm!);
    expect(cumulative[cumulative.length - 1]!).toBeGreaterThan(Math.sqrt(power));
    const allan = readCsv(join(dir, 'a.csv'));
    // At 5 mm/s the position is a ramp: σ(τ) = vτ/√2 (NIST SP 1065, memory), 3.536 nm at τ = 1 µs.
    expect(Number(allan.adev_nm![0]) / ((0.005 * Number(allan.tau_s![0]) * 1e9) / Math.SQRT2)).toBeCloseTo(1, 2);
    const html = readFileSync(join(dir, 'r.html'), 'utf8');
    expect(html).not.toMatch(/https?:\/\//);
    expect(html.match(/<svg class="plot"/g)!.length).toBe(3);
    expect(html).toContain('<line class="marker"');
    expect(html).toMatch(/1× fringe<\/td><td>15798\.0<\/td>/);
  });

  it("reads replay's result file as positions and agrees with the raw capture", async () => {
    const replayed = await fringetally(['replay', 'cap.wav', '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'circle.json', '--out', 'rows.csv', '--quiet'], dir);
    expect(replayed.code, replayed.stderr).toBe(0);
    const fromRows = await fringetally(['spectrum', 'rows.csv', '--wavelength-nm', '632.9908', '--fold', '2', '--segment', '8192', '--out', 's2.csv', '--quiet'], dir);
    expect(fromRows.code, fromRows.stderr).toBe(0);
    const raw = numbers(readCsv(join(dir, 's.csv')).asd_nm_per_rthz!);
    const rows = numbers(readCsv(join(dir, 's2.csv')).asd_nm_per_rthz!);
    // Rows hold positions to 1 pm; the line bin (about 1 nm/√Hz) agrees to 1e-4.
    const at = Math.round(fringeHz / (1e6 / 8192));
    expect(rows[at]! / raw[at]!).toBeCloseTo(1, 4);
  });

  it('names the problem: no output, a bad segment, too short a capture, a calibration for positions', async () => {
    expect((await fringetally(['spectrum', 'cap.wav'], dir)).stderr).toMatch(/give at least one of --out, --allan-out and --report/);
    expect((await fringetally(['spectrum', 'cap.wav', '--out', 'x.csv', '--segment', '1000'], dir)).stderr).toMatch(/--segment must be a power of two/);
    const short = await fringetally(['spectrum', 'cap.wav', '--wavelength-nm', '632.9908', '--fold', '2', '--calibration', 'circle.json', '--segment', '1048576', '--out', 'x.csv', '--quiet'], dir);
    expect(short.code).toBe(1);
    expect(short.stderr).toMatch(/100000 samples, fewer than one segment of 1048576 \(--segment\)/);
    const mixed = await fringetally(['spectrum', 'rows.csv', '--calibration', 'circle.json', '--out', 'x.csv'], dir);
    expect(mixed.code).toBe(2);
    expect(mixed.stderr).toMatch(/--calibration applies to raw captures only/);
  });
});
