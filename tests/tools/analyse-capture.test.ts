// calibrate without a report reads only the blocks its analyses take (analyseCapture): the same periodic-error and
// radius figures as the whole run (runCapture) that reads every block. The check value is the whole run itself;
// the capture is simulate's invented scenario with a beam interruption and an overspeed.
// analyseCapture is imported from the compiled tools, as the command runs it.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { fringetally } from './cli.js';
import { createProgress } from '../../tools/progress.js';
import { openCapture } from '../../src/io/capture/index.js';

type Run = typeof import('../../tools/capture-run.js');
let run: Run;
let fit: typeof import('../../tools/fit-capture.js');
let dir = '';
const settings = { wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1 };

beforeAll(async () => {
  run = (await import(pathToFileURL(resolve('dist/tools/capture-run.js')).href)) as Run;
  fit = (await import(pathToFileURL(resolve('dist/tools/fit-capture.js')).href)) as typeof fit;
  dir = mkdtempSync(join(tmpdir(), 'fringetally-analyse-'));
  const simulated = await fringetally(['simulate', '--out', 'two.wav', '--duration-s', '0.06', '--interrupt', '0.02:0.002', '--overspeed', '0.04:0.001:0.3', '--quiet'], dir);
  expect(simulated.code, simulated.stderr).toBe(0);
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('analyseCapture', () => {
  it('gives the whole run\'s periodic error and radius figures from the analysed blocks alone', async () => {
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
    const path = join(dir, 'two.wav');
    // A budget of 2 blocks: 1 block in 8 analysed, the interruption and the overspeed among the blocks left out
    // or the settling samples.
    const options = { open: {}, calibration, settings, progress: createProgress(true), analysisThread: false, analysisBudgetSamples: 2 * 4096 };
    const whole = await run.runCapture(path, options);
    const parts = await run.analyseCapture(path, options);
    expect(whole.analysedEvery).toBeGreaterThan(1);
    expect(parts.analysedEvery).toBe(whole.analysedEvery);
    expect(parts.samples).toBe(whole.samples);
    expect(parts.residual).toEqual(whole.residual);
    expect(parts.afterNotMeasured).toBe(whole.afterNotMeasured);
    expect(parts.after.summary.samples).toBe(whole.after.summary.samples);
    expect(parts.before.summary.samples).toBe(whole.before.summary.samples);
    // The phase from the block's own start differs by whole turns: the same figures to rounding, but for "before",
    // which bins the error by that phase: a sample at a phase of exactly 0 mod 2π (v = 0, common with integer
    // samples) can fall on either side of the bin edge at 0 (2π·turns is rounded), here moving one sample of 8192.
    for (const key of ['firstHarmonicRad', 'secondHarmonicRad', 'peakToPeakRad', 'rmsRad'] as const) {
      expect(parts.after.summary[key]).toBeCloseTo(whole.after.summary[key], 10);
      expect(Math.abs(parts.before.summary[key] / whole.before.summary[key] - 1)).toBeLessThan(1e-3);
    }
    expect(parts.before.summary.firstHarmonicRad).toBeGreaterThan(1e-4);
  });

  it('gives the same figures with its analyses on a worker thread, blocks left out handed over as lengths', async () => {
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
    const options = { open: {}, calibration, settings, progress: createProgress(true), analysisBudgetSamples: 2 * 4096 };
    const inline = await run.analyseCapture(join(dir, 'two.wav'), { ...options, analysisThread: false });
    const threaded = await run.analyseCapture(join(dir, 'two.wav'), { ...options, analysisThread: true });
    expect(inline.analysedEvery).toBeGreaterThan(1);
    expect(threaded).toEqual(inline);
  });

  it('names the file and the byte where a part it reads ends early, with the analyses on a worker thread', async () => {
    // The data chunk declares twice the samples the file holds: the parts in the second half cannot be read.
    const bytes = readFileSync(join(dir, 'two.wav'));
    const at = bytes.indexOf('data', 12, 'latin1');
    bytes.writeUInt32LE(2 * bytes.readUInt32LE(at + 4), at + 4);
    const path = join(dir, 'short.wav');
    writeFileSync(path, bytes);
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
    const options = { open: {}, calibration, settings, progress: createProgress(true), analysisBudgetSamples: 2 * 4096, analysisThread: true };
    await expect(run.analyseCapture(path, options)).rejects.toThrow(/short\.wav.*byte \d+/s);
  });

  it('takes the parts kept from a pass over the whole capture, and reads them from the file when the pass did not end', async () => {
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
    const path = join(dir, 'two.wav');
    const options = { open: {}, calibration, settings, progress: createProgress(true), analysisThread: false, analysisBudgetSamples: 2 * 4096 };
    const fromFile = await run.analyseCapture(path, options);
    const capture = await openCapture(path, { blockSize: 4096 });
    const kept = run.keepAnalysedParts(capture.info, options)!;
    // Kept from a pass that saw the samples halved: the figures must follow what was kept, not the file.
    for await (const block of capture.blocks()) {
      block.x.forEach((value, i) => (block.x[i] = Math.round(value / 2)));
      kept.add(block);
    }
    const fromKept = await run.analyseCapture(path, options, kept);
    expect(fromKept.residual).not.toEqual(fromFile.residual);
    kept.reset();
    expect(await run.analyseCapture(path, options, kept)).toEqual(fromFile);
    // Kept from the fit's pass over every sample, as calibrate does: the file's figures to the bit.
    const fitted = await fit.fitCapture(path, {}, {}, createProgress(true), (info) => run.keepAnalysedParts(info, options));
    expect(fitted.kept?.complete).toBe(true);
    expect(await run.analyseCapture(path, options, fitted.kept)).toEqual(fromFile);
  });

  it('runs the whole capture when every block is analysed', async () => {
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
    const options = { open: {}, calibration, settings, progress: createProgress(true), analysisThread: false };
    const parts = await run.analyseCapture(join(dir, 'two.wav'), options);
    expect(parts.analysedEvery).toBe(1);
    expect('alarmCounts' in parts).toBe(true); // runCapture's result
  });
});
