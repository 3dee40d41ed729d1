// The capture analyses on a worker thread (--analysis-thread): the same results as in line, to the last bit, for
// two outputs with alarms and a harmonic correction, and for three outputs with a time column, a correction and a
// schedule that leaves blocks out; a failure inside the worker reaches the caller. The check value is the in-line
// run itself. Captures invented: simulate's scenario, and tests/support/detector-outputs.ts.
// The worker runs the compiled tools (dist/tools, built by the test command before the tests).
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { fringetally } from './cli.js';
import { detectorOutputs, UNBALANCED_THREE, wanderingPhase } from '../support/detector-outputs.js';
import type { RunOptions, RunResult } from '../../tools/capture-run.js';
import { createProgress } from '../../tools/progress.js';

type RunCapture = (path: string, options: RunOptions) => Promise<RunResult>;
let runCapture: RunCapture;
let dir = '';
const settings = { wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1 };
const common = ['--wavelength-nm', '632.9908', '--fold', '2'];

beforeAll(async () => {
  ({ runCapture } = (await import(pathToFileURL(resolve('dist/tools/capture-run.js')).href)) as { runCapture: RunCapture });
  dir = mkdtempSync(join(tmpdir(), 'fringetally-thread-'));
  const simulated = await fringetally(
    ['simulate', '--out', 'two.wav', '--duration-s', '0.06', '--interrupt', '0.02:0.002', '--overspeed', '0.04:0.001:0.3', '--quiet'],
    dir,
  );
  expect(simulated.code, simulated.stderr).toBe(0);
  // Three outputs of a drifting source, with times: 30 001 samples, so the last block is short.
  const n = 30_001;
  const phase = wanderingPhase(n, 40);
  const { channels } = detectorOutputs(UNBALANCED_THREE, phase, { power: (i) => 1 + 0.05 * Math.sin((2 * Math.PI * i) / n), noiseRms: 2e-4 });
  const rows = ['t,a,b,c', ...Array.from(phase, (_, i) => `${(i * 1e-4).toFixed(4)},${channels.map((channel) => channel[i]!.toFixed(6)).join(',')}`)];
  writeFileSync(join(dir, 'three.csv'), rows.join('\n') + '\n');
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const both = async (path: string, options: Omit<RunOptions, 'analysisThread' | 'progress' | 'settings'>) => {
  const run = (analysisThread: boolean) => runCapture(join(dir, path), { ...options, settings, progress: createProgress(true), analysisThread });
  return { inline: await run(false), threaded: await run(true) };
};

describe('analyses on a worker thread', () => {
  it('two outputs with alarms and a harmonic correction: every result the same as in line', async () => {
    // simulate's ellipse with amplitudes 10 % too large: the mean radius reads 0.91, calibration_stale is raised.
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 13200, amplitudeY: 11880, phaseErrorRad: 0.06 };
    const { inline, threaded } = await both('two.wav', { open: {}, calibration, harmonics: { cos: [0.001, 0.0005], sin: [-0.0007, 0] } });
    expect(inline.alarmCounts.lowSignal).toBeGreaterThan(0);
    expect(inline.modelWatch.raised).toBeGreaterThan(0);
    expect(inline.after.summary.samples).toBeGreaterThan(0);
    expect(threaded).toEqual(inline);
  });

  it('three outputs with times, a harmonic correction and blocks left out: every result the same as in line', async () => {
    const { inline, threaded } = await both('three.csv', {
      open: { channels: ['a', 'b', 'c'] },
      calibration: { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 },
      channels: UNBALANCED_THREE,
      harmonics: { cos: [0.002], sin: [0.001] },
      analysisBudgetSamples: 2 * 4096,
    });
    expect(inline.analysedEvery).toBe(4);
    expect(inline.power).not.toBeNull();
    expect(inline.report.position.t.at(-1)).toBeGreaterThan(2.9); // times from the t column (0.1 ms a sample)
    expect(threaded).toEqual(inline);
  });

  it('a failure inside the worker reaches the caller, named', async () => {
    const options = { open: {}, calibration: { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 }, settings, modelWatch: { windowSamples: 3 } };
    await expect(runCapture(join(dir, 'two.wav'), { ...options, progress: createProgress(true), analysisThread: false })).rejects.toThrow(/windowSamples/);
    await expect(runCapture(join(dir, 'two.wav'), { ...options, progress: createProgress(true), analysisThread: true })).rejects.toThrow(/capture analyses: .*windowSamples/);
  });

  it('a capture that fails midway stops the worker and names the place, as in line', async () => {
    // two.wav cut 1001 bytes short: the data chunk declares more than the file holds.
    const bytes = readFileSync(join(dir, 'two.wav'));
    writeFileSync(join(dir, 'cut.wav'), bytes.subarray(0, bytes.length - 1001));
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
    const run = (analysisThread: boolean) => runCapture(join(dir, 'cut.wav'), { open: {}, calibration, settings, progress: createProgress(true), analysisThread });
    const inline = await run(false).catch((error: Error) => error);
    const threaded = await run(true).catch((error: Error) => error);
    expect(inline).toBeInstanceOf(Error);
    expect((inline as Error).message).toMatch(/more bytes of sample data before the end of the file/);
    expect((threaded as Error).message).toBe((inline as Error).message);
  });

  it('the analyses read the unwrapped phase of analysed blocks only, unless a harmonic estimate takes every block', async () => {
    // runCapture leaves the phase unwritten in blocks left out (two outputs, no harmonic correction): here those
    // blocks carry NaN instead of their phase, and the results must not change; with the harmonics' estimate,
    // which reads every block, they must (the check can fail).
    type Analyses = typeof import('../../tools/capture-analyses.js');
    const { createCaptureAnalyses, createBlockOutput, CAPTURE_BLOCK_SAMPLES: n } = (await import(pathToFileURL(resolve('dist/tools/capture-analyses.js')).href)) as Analyses;
    const { createPipeline } = await import('../../src/accel/index.js');
    const blocks = 12;
    const phase = wanderingPhase(blocks * n, 60);
    const x = phase.map((p) => 1000 * Math.cos(p));
    const y = phase.map((p) => 1000 * Math.sin(p) + 3 * Math.sin(2 * p));
    const calibration = { offsetX: 0, offsetY: 0, amplitudeX: 1000, amplitudeY: 1000, phaseErrorRad: 0 };
    const results = (estimate: boolean) => {
      const config = { calibration, layout: null, mid: 0, rateHz: 1e5, metresPerRad: 5e-8, maxPlotPoints: 64, totalSamples: blocks * n, ...(estimate ? { estimateHarmonics: { orders: 2, totalSamples: blocks * n } } : {}) };
      const plain = createCaptureAnalyses(config);
      const poisoned = createCaptureAnalyses(config);
      const pipeline = createPipeline({ rateHz: 1e5, wavelengthM: 632.9908e-9, fold: 2, calibration, adc: { kind: 'float', fullScale: 1e4 } });
      const output = createBlockOutput();
      for (let b = 0; b < blocks; b++) {
        const xs = x.subarray(b * n, (b + 1) * n);
        const ys = y.subarray(b * n, (b + 1) * n);
        pipeline.process(xs, ys, n, output, []);
        const analysed = b % 3 === 0;
        const block = { firstIndex: b * n, length: n, t: null, analysed, x: analysed ? xs : null, y: analysed ? ys : null, phaseBeforeHarmonics: null };
        plain.add({ ...block, output });
        if (!analysed) output.unwrappedPhaseRad.fill(NaN);
        poisoned.add({ ...block, output });
      }
      return { plain: plain.finish(), poisoned: poisoned.finish() };
    };
    const without = results(false);
    expect(without.plain.after.summary.samples).toBeGreaterThan(0);
    expect(without.poisoned).toEqual(without.plain);
    const withEstimate = results(true);
    expect(withEstimate.poisoned.harmonicEstimate).not.toEqual(withEstimate.plain.harmonicEstimate);
  });

  it('the analyses shared between two instances, joined, give what all the analyses give, flagged samples in analysed blocks too', async () => {
    // analyseCapture shares the analyses between two threads this way; the check value is the analyses run whole.
    type Analyses = typeof import('../../tools/capture-analyses.js');
    const { createCaptureAnalyses, createBlockOutput, joinAnalyses, ANALYSIS_NAMES, CAPTURE_BLOCK_SAMPLES: n } = (await import(pathToFileURL(resolve('dist/tools/capture-analyses.js')).href)) as Analyses;
    const { createPipeline } = await import('../../src/accel/index.js');
    const blocks = 9;
    const phase = wanderingPhase(blocks * n, 60);
    const x = phase.map((p) => 1000 * Math.cos(p));
    const y = phase.map((p) => 1000 * Math.sin(p) + 3 * Math.sin(2 * p));
    // Bad samples (NaN) and a dip of the signal in analysed blocks: flagged, so the analyses leave them out.
    for (const at of [5, 3 * n + 100, 3 * n + 2000, 6 * n + 7]) x[at] = Number.NaN;
    for (let i = 3 * n + 3000; i < 3 * n + 3100; i++) (x[i] = 0.1 * x[i]!), (y[i] = 0.1 * y[i]!);
    const calibration = { offsetX: 0, offsetY: 0, amplitudeX: 1000, amplitudeY: 1000, phaseErrorRad: 0 };
    const config = { calibration, layout: null, mid: 0, rateHz: 1e5, metresPerRad: 5e-8, maxPlotPoints: 64, totalSamples: blocks * n };
    const all = createCaptureAnalyses(config);
    // Every way to share the four between two instances (the first takes the names of the mask's bits).
    const splits = Array.from({ length: 16 }, (_, mask) => ANALYSIS_NAMES.filter((_, k) => (mask >> k) & 1));
    const pairs = splits.map((mine) => ({
      mine,
      ours: createCaptureAnalyses({ ...config, analyses: mine }),
      theirs: createCaptureAnalyses({ ...config, analyses: ANALYSIS_NAMES.filter((name) => !mine.includes(name)) }),
    }));
    const pipeline = createPipeline({ rateHz: 1e5, wavelengthM: 632.9908e-9, fold: 2, calibration, adc: { kind: 'float', fullScale: 1e4 } });
    const output = createBlockOutput();
    let flagged = 0;
    for (let b = 0; b < blocks; b++) {
      const xs = x.subarray(b * n, (b + 1) * n);
      const ys = y.subarray(b * n, (b + 1) * n);
      pipeline.process(xs, ys, n, output, []);
      const analysed = b % 3 === 0;
      if (analysed) flagged += output.flags.filter((flag) => flag !== 0).length;
      const block = { firstIndex: b * n, length: n, t: null, analysed, x: analysed ? xs : null, y: analysed ? ys : null, phaseBeforeHarmonics: null, output };
      all.add(block);
      for (const { ours, theirs } of pairs) {
        ours.add(block);
        theirs.add(block);
      }
    }
    expect(flagged).toBeGreaterThan(100);
    const whole = all.finish();
    expect(whole.after.summary.samples).toBeGreaterThan(0);
    expect(whole.before.summary.samples).toBeGreaterThan(0);
    expect(whole.residual.summary.samples).toBeGreaterThan(0);
    expect(whole.report.position.t.length).toBeGreaterThan(0);
    for (const { mine, ours, theirs } of pairs) {
      const results = ours.finish();
      expect(joinAnalyses(results, mine, theirs.finish())).toEqual(whole);
      // An analysis an instance does not run is the other's work alone.
      if (!mine.includes('after')) expect(results.after.summary.samples).toBe(0);
      if (!mine.includes('before')) expect(results.before.summary.samples).toBe(0);
      if (!mine.includes('residual')) expect(results.residual.summary.samples).toBe(0);
      if (!mine.includes('series')) expect(results.report.position.t.length).toBe(0);
    }
  });

  it('a ring of few slots, filled and emptied many times over, with the kernel writing into it in place: the results in line', async () => {
    // The ring's order words, its waits when full and the slots freed last taken again, with the real worker.
    type Thread = typeof import('../../tools/capture-analysis-thread.js');
    type Analyses = typeof import('../../tools/capture-analyses.js');
    const { createRingMemory, startAnalysisThread, analysesInLine } = (await import(pathToFileURL(resolve('dist/tools/capture-analysis-thread.js')).href)) as Thread;
    const { CAPTURE_BLOCK_SAMPLES: n } = (await import(pathToFileURL(resolve('dist/tools/capture-analyses.js')).href)) as Analyses;
    const { createPipeline } = await import('../../src/accel/index.js');
    const blocks = 40;
    const phase = wanderingPhase(blocks * n, 80);
    const x = Int16Array.from(phase, (p) => 1000 * Math.cos(p));
    const y = Int16Array.from(phase, (p) => 1000 * Math.sin(p) + 3 * Math.sin(2 * p));
    const calibration = { offsetX: 0, offsetY: 0, amplitudeX: 1000, amplitudeY: 1000, phaseErrorRad: 0 };
    const config = { calibration, layout: null, mid: 0, rateHz: 1e5, metresPerRad: 5e-8, maxPlotPoints: 64, totalSamples: blocks * n };
    const chain = { rateHz: 1e5, wavelengthM: 632.9908e-9, fold: 2, calibration, adc: { kind: 'int16' } } as const;
    const ring = createRingMemory(3);
    expect(ring.memory).not.toBeNull();
    const runs = [
      { thread: startAnalysisThread(config, ring), pipeline: createPipeline({ ...chain, kernelMemory: ring.memory! }) },
      { thread: analysesInLine(config), pipeline: createPipeline(chain) },
    ];
    const results = [];
    for (const { thread, pipeline } of runs) {
      for (let b = 0; b < blocks; b++) {
        const output = await thread.next();
        const xs = x.subarray(b * n, (b + 1) * n);
        const ys = y.subarray(b * n, (b + 1) * n);
        const analysed = b % 4 === 1;
        pipeline.process(xs, ys, n, output, []);
        if (b % 7 === 3) thread.skip(n);
        else thread.add({ firstIndex: b * n, length: n, t: null, analysed, x: analysed ? xs : null, y: analysed ? ys : null, phaseBeforeHarmonics: null });
      }
      results.push(await thread.finish());
    }
    const [threaded, inline] = results;
    expect(inline!.after.summary.samples).toBeGreaterThan(0);
    expect(inline!.report.position.t.length).toBeGreaterThan(0);
    expect(threaded).toEqual(inline);
  });

  it('a worker started ahead takes the next run, with the same results; one never taken does not keep the process alive', async () => {
    type Start = typeof import('../../tools/analysis-worker-start.js');
    const start = (await import(pathToFileURL(resolve('dist/tools/analysis-worker-start.js')).href)) as Start;
    const calibration = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
    const run = (analysisThread: boolean) => runCapture(join(dir, 'two.wav'), { open: {}, calibration, settings, progress: createProgress(true), analysisThread });
    start.prepareAnalysisThread();
    const threaded = await run(true);
    expect(start.takePreparedWorker()).toBeNull(); // the run took it
    expect(threaded).toEqual(await run(false));
    // A process that prepares a worker and never runs: it must end by itself (a worker keeping it alive would hang
    // until the timeout kills it). A script file, not --eval: the worker inherits the process's options.
    const script = join(dir, 'prepare-only.mjs');
    writeFileSync(script, `(await import(${JSON.stringify(pathToFileURL(resolve('dist/tools/analysis-worker-start.js')).href)})).prepareAnalysisThread();\n`);
    const ended = spawnSync(process.execPath, [script], { timeout: 20_000, encoding: 'utf8' });
    expect(ended.signal, ended.stderr).toBeNull();
    expect(ended.status, ended.stderr).toBe(0);
  });

  it('replay --analysis-thread on and off write the same rows and summary; a wrong value is named', async () => {
    for (const mode of ['on', 'off']) {
      const replayed = await fringetally(['replay', 'two.wav', ...common, '--out', `two-${mode}.csv`, '--every', '7', '--analysis-thread', mode], dir);
      expect(replayed.code, replayed.stderr).toBe(0);
      writeFileSync(join(dir, `two-${mode}.txt`), replayed.stderr);
    }
    expect(readFileSync(join(dir, 'two-on.csv'), 'utf8')).toBe(readFileSync(join(dir, 'two-off.csv'), 'utf8'));
    expect(readFileSync(join(dir, 'two-on.txt'), 'utf8').replace('two-on.csv', 'two-off.csv')).toBe(readFileSync(join(dir, 'two-off.txt'), 'utf8'));
    const wrong = await fringetally(['replay', 'two.wav', ...common, '--out', 'x.csv', '--analysis-thread', 'sometimes'], dir);
    expect(wrong.code).toBe(2);
    expect(wrong.stderr).toMatch(/--analysis-thread takes auto, on or off \(got "sometimes"\)/);
  });
});
