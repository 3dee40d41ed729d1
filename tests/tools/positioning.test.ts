// `fringetally positioning` end to end on an invented bidirectional target run, written as a file of positions
// (t, position_m, the layout of replay's rows): the compensation table gives back the injected deviations, the
// report draws the deviations with their ±2s bands, and a missing stop is named.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fringetally, numbers, readCsv } from './cli.js';

const RATE_HZ = 100;
const TARGETS_MM = [0, 50, 100, 150, 200];
const CYCLES = 3;
/** Invented deviations, µm: a slope, a reversal of 4 µm and a drift of 0.3 µm per cycle. */
const deviationUm = (i: number, direction: 1 | -1, cycle: number) => 2 * i + (direction === 1 ? 2 : -2) + 0.3 * cycle;

/** Positions (m) of the run as CSV rows; `skip` leaves out the dwell of that stop (0-based in run order). */
function runCsv(options: { skip?: number; sign?: number } = {}): string {
  const sign = options.sign ?? 1;
  const rows: string[] = ['t,position_m'];
  let x = -0.002;
  const push = (value: number) => rows.push(`${((rows.length - 1) / RATE_HZ).toFixed(2)},${(sign * value).toFixed(12)}`);
  const moveTo = (to: number) => {
    const from = x;
    for (let s = 1; s <= 30; s++) push(from + ((to - from) * s) / 30);
    x = to;
  };
  const dwell = (seconds: number) => {
    for (let s = 0; s < seconds * RATE_HZ; s++) push(x + 20e-9 * Math.sin(0.7 * s)); // 20 nm of vibration
  };
  dwell(1);
  let stop = 0;
  for (let j = 0; j < CYCLES; j++) {
    TARGETS_MM.forEach((t, i) => {
      moveTo(t * 1e-3 + deviationUm(i, 1, j) * 1e-6);
      if (stop++ !== options.skip) dwell(1);
    });
    moveTo(0.203); // overrun, so that the last target is approached from above
    for (let i = TARGETS_MM.length - 1; i >= 0; i--) {
      moveTo(TARGETS_MM[i]! * 1e-3 + deviationUm(i, -1, j) * 1e-6);
      if (stop++ !== options.skip) dwell(1);
    }
    moveTo(-0.003);
  }
  dwell(1);
  return rows.join('\n') + '\n';
}

let dir = '';
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-positioning-'));
  writeFileSync(join(dir, 'run.csv'), runCsv());
  writeFileSync(join(dir, 'inverted.csv'), runCsv({ sign: -1 }));
  writeFileSync(join(dir, 'missing.csv'), runCsv({ skip: 12 }));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('fringetally positioning', () => {
  it('gives back the injected mean deviations per direction and draws them with their bands', async () => {
    const result = await fringetally(['positioning', 'run.csv', '--targets', '0:50:200', '--cycles', '3', '--offset-mm', '0', '--out', 'table.csv', '--stops-out', 'stops.csv', '--report', 'r.html'], dir);
    expect(result.code, result.stderr).toBe(0);
    const table = readCsv(join(dir, 'table.csv'));
    expect(numbers(table.target_mm!)).toEqual(TARGETS_MM);
    const up = numbers(table.mean_deviation_up_um!);
    const down = numbers(table.mean_deviation_down_um!);
    TARGETS_MM.forEach((_, i) => {
      // Mean over cycles 0, 1, 2 of the injected deviations: drift term 0.3 · 1. The 20 nm vibration averages out
      // to within a few nm over 100 samples; the table is written to 1 nm.
      expect(up[i]).toBeCloseTo(2 * i + 2 + 0.3, 2);
      expect(down[i]).toBeCloseTo(2 * i - 2 + 0.3, 2);
    });
    // Hand-worked for this invented run (ISO 230-2:2014 definitions, clause numbers recalled): s = 0.3 µm in each
    // direction and at each target, B = 4 µm everywhere, E = (8 + 2.3) − (−2 + 0.3) = 12 µm,
    // R = 2·0.3 + 2·0.3 + 4 = 5.2 µm, A = (10.3 + 0.6) − (−1.7 − 0.6) = 13.2 µm.
    expect(result.stderr).toMatch(/systematic positional deviation E 12\.00\d µm, mean reversal value 4\.00\d µm, repeatability R 5\.2\d\d µm, accuracy A 13\.2\d\d µm/);
    const stops = readCsv(join(dir, 'stops.csv'));
    expect(stops.start_s!.length).toBe(2 + 5 * 2 * 3); // the rests at both ends of the record are left out
    expect(stops.direction!.filter((d) => d === 'up').length).toBe(15);
    const html = readFileSync(join(dir, 'r.html'), 'utf8');
    expect(html).not.toMatch(/https?:\/\//);
    expect(html.match(/<path class="band"/g)!.length).toBe(2);
    expect(html.match(/<path class="dots" d="(M[^"]*)"/)![1]!.split('M').length - 1).toBe(30);
    expect(html).toContain('ISO 230-2:2014');
  });

  it('zeroes on the first stop by default and follows an interferometer counting the other way', async () => {
    const result = await fringetally(['positioning', 'inverted.csv', '--targets', '0,50,100,150,200', '--cycles', '3', '--invert', '--out', 'inverted-table.csv', '--quiet'], dir);
    expect(result.code, result.stderr).toBe(0);
    const table = readCsv(join(dir, 'inverted-table.csv'));
    // The first stop (target 1 ↑, cycle 1, injected +2 µm) now reads 0: every deviation moves by −2 µm.
    expect(numbers(table.mean_deviation_up_um!)[4]).toBeCloseTo(8 + 2 + 0.3 - 2, 2);
    expect(numbers(table.mean_deviation_down_um!)[0]).toBeCloseTo(-2 + 0.3 - 2, 2);
  });

  it('names the missing stop', async () => {
    // Stop 13 in run order: cycle 2, the third target (100 mm) in the positive direction.
    const result = await fringetally(['positioning', 'missing.csv', '--targets', '0:50:200', '--cycles', '3', '--offset-mm', '0', '--out', 'x.csv'], dir);
    expect(result.code).toBe(1);
    expect(result.stderr).toMatch(/missing\.csv: missing stop: expected target 3 \(100\.0000 mm\) ↑ \(positive direction\) of cycle 2, but the next stop at [0-9.]+–[0-9.]+ s reads 150\.00\d+ mm, at target 4/);
    expect(result.stderr).toMatch(/stops found: at least 0\.5 s within a band 1 µm wide/);
    const usage = await fringetally(['positioning', 'run.csv', '--targets', '0,50,50', '--cycles', '3', '--out', 'x.csv'], dir);
    expect(usage.code).toBe(2);
    expect(usage.stderr).toMatch(/--targets must increase, without repeats/);
  });
});
