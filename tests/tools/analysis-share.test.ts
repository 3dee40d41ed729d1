// A long capture's periodic-error and radius analyses look at one block in n (createAnalysisSchedule): the summary
// says so, and what they find stays within the stated bound of the full analysis. Check value: an offset ε·R left
// uncorrected gives a once-per-fringe phase error of ε rad (Heydemann's model, REFERENCES.md, derived there):
// ε = 120/12000 = 0.01 rad. Capture invented (simulate), as in spectrum.test.ts.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { runCapture } from '../../tools/capture-run.js';
import { createProgress } from '../../tools/progress.js';
import { formatPeriodicError } from '../../tools/summary.js';
import { fringetally } from './cli.js';

let dir = '';
beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-share-'));
  const simulated = await fringetally(
    ['simulate', '--out', 'cap.wav', '--motion', 'constant', '--velocity-m-s', '0.005', '--duration-s', '0.2', '--offset-x', '120', '--offset-y', '0',
      '--amplitude-x', '12000', '--amplitude-y', '12000', '--phase-error-rad', '0', '--noise', '5', '--quiet'],
    dir,
  );
  expect(simulated.code, simulated.stderr).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

// A correction that ignores the offset, so that the corrected phase keeps the ε error.
const circle = { offsetX: 0, offsetY: 0, amplitudeX: 12000, amplitudeY: 12000, phaseErrorRad: 0 };
const run = (analysisBudgetSamples?: number, calibration = circle) =>
  runCapture(join(dir, 'cap.wav'), {
    open: {},
    calibration,
    settings: { wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1 },
    progress: createProgress(true),
    ...(analysisBudgetSamples === undefined ? {} : { analysisBudgetSamples }),
  });

describe('analyses on a share of a long capture', () => {
  it('finds the periodic error and radius harmonics within 1 % of the full analysis, and says what it looked at', async () => {
    const full = await run();
    const share = await run(8 * 4096); // 2e5 samples = 49 blocks → one block in 7
    expect(full.analysedEvery).toBe(1);
    expect(share.analysedEvery).toBe(7);
    expect(share.after.summary.samples).toBeLessThan(full.after.summary.samples / 5);
    expect(full.after.summary.firstHarmonicRad).toBeCloseTo(0.01, 3);
    for (const key of ['firstHarmonicRad', 'rmsRad', 'peakToPeakRad'] as const) {
      expect(Math.abs(share.after.summary[key] / full.after.summary[key] - 1)).toBeLessThan(0.01);
    }
    // With the offset corrected, the uncorrected phase shows the ε error against the corrected one.
    const fullBefore = (await run(undefined, { ...circle, offsetX: 120 })).before.summary;
    const shareBefore = (await run(8 * 4096, { ...circle, offsetX: 120 })).before.summary;
    expect(fullBefore.firstHarmonicRad).toBeCloseTo(0.01, 3);
    expect(Math.abs(shareBefore.firstHarmonicRad / fullBefore.firstHarmonicRad - 1)).toBeLessThan(0.01);
    // The offset shows in the radius as its first harmonic of relative amplitude ε.
    expect(Math.abs(share.residual.summary.radiusHarmonics[0]! / full.residual.summary.radiusHarmonics[0]! - 1)).toBeLessThan(0.01);
    // Everything that is not an average is the same: rows, positions, alarms.
    expect(share.finalPositionM).toBe(full.finalPositionM);
    expect(share.alarmCounts).toEqual(full.alarmCounts);
    expect(share.report).toEqual(full.report);
    expect(formatPeriodicError(share).at(-1)).toBe('  (periodic error and radius analysed on one block of 4096 samples in every 7, spread over the whole capture)');
    expect(formatPeriodicError(full).join('\n')).not.toContain('analysed on');
  });
});
