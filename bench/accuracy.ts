// Accuracy benchmark of the ellipse fits and the online correction (invented, synthetic scenarios):
//  1. Monte-Carlo over fixed seeds: noise 1-3 % of the radius, arcs of 0.5, 0.75 and 1 fringe; per fit method, the
//     bias and RMS error of each parameter and the residual periodic error of correcting with the fitted ellipse,
//     beside correcting with the true one (the noise floor).
//  2. A drifting ellipse (offsets and gains move by several percent over the run): periodic error of a batch fit
//     made at the start, of the online correction and of the known ellipse; heap growth of the online stage.
//  3. Real three-output recordings when ../shared/realdata exists (real-recordings.ts): pairs (classic, bias-reduced,
//     online) and all three outputs against an independent reference; skipped with a note otherwise.
//  4. A ghost beam on the published model of Wu & Deslattes (ghost-beam.ts): the known ellipse against the model's
//     prediction, classic, bias-reduced, three outputs and the harmonic correction against the simulated truth.
// Runs alone: `node dist/bench/accuracy.js [--json] [--seeds N] [--fit-samples N]` (after `npx tsc -p tsconfig.json`).

import { pathToFileURL } from 'node:url';
import { parseArgs } from 'node:util';
import {
  createCorrection,
  createEllipseAccumulator,
  createPeriodicErrorAnalyzer,
  createRandom,
  wrapPhase,
  createEllipseFit,
  createOnlineCorrection,
  ELLIPSE_FIT_METHODS,
  type EllipseCalibration,
  type EllipseFitMethod,
} from '../src/core/index.js';
import { formatGhostBeam, runGhostBeam, type GhostBeamResult } from './ghost-beam.js';
import { formatRealRecordings, runRealRecordings, type RealRecordingsResult } from './real-recordings.js';

/** Vacuum wavelength of an unstabilised He-Ne (CIPM 2007, docs/references.md) and a single-pass fold of 2. */
const WAVELENGTH_NM = 632.9908;
const FOLD = 2;
const NM_PER_RAD = WAVELENGTH_NM / (2 * Math.PI * FOLD);

/** Realistic detector imperfections, radius 1: offsets of 8 % and −5 %, gain ratio 1.087, 0.06 rad quadrature error. */
const TRUTH: EllipseCalibration = { offsetX: 0.08, offsetY: -0.05, amplitudeX: 1, amplitudeY: 0.92, phaseErrorRad: 0.06 };
const PARAMETERS = ['offsetX', 'offsetY', 'amplitudeX', 'amplitudeY', 'phaseErrorRad'] as const;
type Parameter = (typeof PARAMETERS)[number];

export interface AccuracyOptions {
  /** Monte-Carlo trials per condition. Default 300. */
  readonly seeds?: number;
  /**
   * Samples per fit. Default 20000 (2 ms of a 10 MHz capture): the bias, O(σ²), outweighs the scatter, O(σ/√n),
   * once n exceeds about 1/σ²; with far fewer samples scatter dominates and all fits look alike.
   */
  readonly fitSamples?: number;
  /** Samples of the drift scenario. Default 400000. */
  readonly driftSamples?: number;
}

export interface PeriodicFigures {
  /** Mean over trials of the harmonic amplitudes and the peak-to-peak of the binned mean error, rad and nm (fold 2). */
  firstHarmonicRad: number;
  secondHarmonicRad: number;
  peakToPeakRad: number;
  peakToPeakNm: number;
}

export interface MethodFigures {
  method: EllipseFitMethod;
  failedFits: number;
  /** Per parameter: mean error (bias) and RMS error, in units of the radius (phase error: rad). */
  bias: Record<Parameter, number>;
  rms: Record<Parameter, number>;
  /** Error the calibration itself leaves, evaluated on noise-free points of the true ellipse (0 for the true one). */
  intrinsic: PeriodicFigures;
  /** Measured on a fresh noisy capture of 8 fringes, as an analysis tool would see it. */
  measured: PeriodicFigures;
}

export interface ConditionFigures {
  noiseOfRadius: number;
  arcFringes: number;
  trials: number;
  methods: MethodFigures[];
  /** The same noisy captures corrected with the true ellipse: the noise floor of `measured`. */
  floor: PeriodicFigures;
}

export interface DriftFigures {
  samples: number;
  driftPercent: { offsetX: number; offsetY: number; amplitudeX: number; amplitudeY: number };
  /** Periodic error over the last quarter of the run. */
  batchAtStart: PeriodicFigures;
  online: Record<'heydemann' | 'hyper', PeriodicFigures & { updates: number; refused: number }>;
  knownEllipse: PeriodicFigures;
  onlineNsPerSample: number;
  /** Heap growth over a long steady run of 4096-sample blocks (NaN without --expose-gc). */
  onlineHeapGrowthBytes: number;
}

export interface AccuracyResult {
  truth: EllipseCalibration;
  fitSamples: number;
  conditions: ConditionFigures[];
  drift: DriftFigures;
  /** Real recordings, or the note why they were skipped. */
  real: RealRecordingsResult;
  ghost: GhostBeamResult;
  seconds: number;
}

const EVAL_SAMPLES = 8192;
const EVAL_FRINGES = 8;

function emptyFigures(): PeriodicFigures {
  return { firstHarmonicRad: 0, secondHarmonicRad: 0, peakToPeakRad: 0, peakToPeakNm: 0 };
}

function accumulateFigures(into: PeriodicFigures, first: number, second: number, peakToPeak: number, trials: number): void {
  into.firstHarmonicRad += first / trials;
  into.secondHarmonicRad += second / trials;
  into.peakToPeakRad += peakToPeak / trials;
  into.peakToPeakNm += (peakToPeak * NM_PER_RAD) / trials;
}

/** Phase error of correcting points of `truth` (noisy or not) with `calibration`, binned by the true phase. */
function periodicError(
  calibration: EllipseCalibration,
  phase: Float64Array,
  x: Float64Array,
  y: Float64Array,
  u: Float64Array,
  v: Float64Array,
  error: Float64Array,
  length: number,
) {
  createCorrection({ calibration }).process(x, y, u, v, length);
  for (let i = 0; i < length; i++) error[i] = wrapPhase(Math.atan2(v[i]!, u[i]!) - phase[i]!);
  const analyzer = createPeriodicErrorAnalyzer({ bins: 64 });
  analyzer.add(phase, error, length);
  return analyzer.summary();
}

function draw(ellipse: EllipseCalibration, phase: Float64Array, x: Float64Array, y: Float64Array, length: number, noise: number, seed: number): void {
  const random = createRandom(seed);
  for (let i = 0; i < length; i++) {
    x[i] = ellipse.amplitudeX * Math.cos(phase[i]!) + ellipse.offsetX + noise * random.gaussian();
    y[i] = ellipse.amplitudeY * Math.sin(phase[i]! + ellipse.phaseErrorRad) + ellipse.offsetY + noise * random.gaussian();
  }
}

function runCondition(noise: number, arcFringes: number, trials: number, fitSamples: number): ConditionFigures {
  const fits = ELLIPSE_FIT_METHODS.map((method) => createEllipseFit({ method, minCoverage: 0 }));
  const methods: MethodFigures[] = ELLIPSE_FIT_METHODS.map((method) => ({
    method,
    failedFits: 0,
    bias: { offsetX: 0, offsetY: 0, amplitudeX: 0, amplitudeY: 0, phaseErrorRad: 0 },
    rms: { offsetX: 0, offsetY: 0, amplitudeX: 0, amplitudeY: 0, phaseErrorRad: 0 },
    intrinsic: emptyFigures(),
    measured: emptyFigures(),
  }));
  const floor = emptyFigures();
  const fitPhase = new Float64Array(fitSamples);
  const fitX = new Float64Array(fitSamples);
  const fitY = new Float64Array(fitSamples);
  // The arc starts at a fixed phase so that a bias, which depends on where the arc lies, is not averaged away.
  for (let i = 0; i < fitSamples; i++) fitPhase[i] = 0.4 + (2 * Math.PI * arcFringes * i) / fitSamples;
  const evalPhase = new Float64Array(EVAL_SAMPLES);
  for (let i = 0; i < EVAL_SAMPLES; i++) evalPhase[i] = (2 * Math.PI * EVAL_FRINGES * i) / EVAL_SAMPLES + 0.1;
  const evalX = new Float64Array(EVAL_SAMPLES);
  const evalY = new Float64Array(EVAL_SAMPLES);
  const cleanX = new Float64Array(EVAL_SAMPLES);
  const cleanY = new Float64Array(EVAL_SAMPLES);
  const u = new Float64Array(EVAL_SAMPLES);
  const v = new Float64Array(EVAL_SAMPLES);
  const error = new Float64Array(EVAL_SAMPLES);
  draw(TRUTH, evalPhase, cleanX, cleanY, EVAL_SAMPLES, 0, 1);
  const accumulator = createEllipseAccumulator({ minCoverage: 0 });
  const counted = new Float64Array(ELLIPSE_FIT_METHODS.length);

  for (let trial = 0; trial < trials; trial++) {
    draw(TRUTH, fitPhase, fitX, fitY, fitSamples, noise, 1000 + trial);
    draw(TRUTH, evalPhase, evalX, evalY, EVAL_SAMPLES, noise, 500_000 + trial);
    accumulator.reset();
    accumulator.add(fitX, fitY, fitSamples);
    const truthMeasured = periodicError(TRUTH, evalPhase, evalX, evalY, u, v, error, EVAL_SAMPLES);
    accumulateFigures(floor, truthMeasured.firstHarmonicRad, truthMeasured.secondHarmonicRad, truthMeasured.peakToPeakRad, trials);
    fits.forEach((fit, k) => {
      const figures = methods[k]!;
      const result = fit.solve(accumulator);
      if (!result.ok) {
        figures.failedFits++;
        return;
      }
      counted[k] = counted[k]! + 1;
      for (const parameter of PARAMETERS) {
        const deviation = result.calibration[parameter] - TRUTH[parameter];
        figures.bias[parameter] += deviation;
        figures.rms[parameter] += deviation * deviation;
      }
      const intrinsic = periodicError(result.calibration, evalPhase, cleanX, cleanY, u, v, error, EVAL_SAMPLES);
      accumulateFigures(figures.intrinsic, intrinsic.firstHarmonicRad, intrinsic.secondHarmonicRad, intrinsic.peakToPeakRad, trials);
      const measured = periodicError(result.calibration, evalPhase, evalX, evalY, u, v, error, EVAL_SAMPLES);
      accumulateFigures(figures.measured, measured.firstHarmonicRad, measured.secondHarmonicRad, measured.peakToPeakRad, trials);
    });
  }
  methods.forEach((figures, k) => {
    const n = counted[k]!;
    for (const parameter of PARAMETERS) {
      figures.bias[parameter] /= n;
      figures.rms[parameter] = Math.sqrt(figures.rms[parameter] / n);
    }
    // Periodic figures were averaged over all trials; rescale to the successful ones.
    for (const figure of [figures.intrinsic, figures.measured]) {
      for (const key of Object.keys(figure) as (keyof PeriodicFigures)[]) figure[key] *= trials / n;
    }
  });
  return { noiseOfRadius: noise, arcFringes, trials, methods, floor };
}

/** An invented drift scenario: constant velocity, 250 samples per fringe, offsets and gains moving linearly. */
export function driftingEllipseAt(t: number): EllipseCalibration {
  return {
    offsetX: 0.05 + 0.05 * t,
    offsetY: -0.03 + 0.05 * t,
    amplitudeX: 1 + 0.05 * t,
    amplitudeY: 0.9 - 0.04 * t,
    phaseErrorRad: 0.05 + 0.02 * t,
  };
}

function periodicFigures(phase: Float64Array, unwrapped: Float64Array, from: number, to: number): PeriodicFigures {
  const analyzer = createPeriodicErrorAnalyzer({ bins: 64 });
  const error = new Float64Array(to - from);
  for (let i = from; i < to; i++) error[i - from] = unwrapped[i]! - phase[i]!;
  analyzer.add(phase.subarray(from, to), error, to - from);
  const s = analyzer.summary();
  return { firstHarmonicRad: s.firstHarmonicRad, secondHarmonicRad: s.secondHarmonicRad, peakToPeakRad: s.peakToPeakRad, peakToPeakNm: s.peakToPeakRad * NM_PER_RAD };
}

function unwrap(u: Float64Array, v: Float64Array, out: Float64Array, length: number): void {
  let previous = Math.atan2(v[0]!, u[0]!);
  out[0] = previous;
  for (let i = 1; i < length; i++) {
    const phase = Math.atan2(v[i]!, u[i]!);
    out[i] = out[i - 1]! + wrapPhase(phase - previous);
    previous = phase;
  }
}

function runDrift(samples: number): DriftFigures {
  const noise = 0.01;
  const phase = new Float64Array(samples);
  const x = new Float64Array(samples);
  const y = new Float64Array(samples);
  const random = createRandom(7);
  for (let i = 0; i < samples; i++) {
    const e = driftingEllipseAt(i / samples);
    phase[i] = 0.3 + ((2 * Math.PI) / 250) * i;
    x[i] = e.amplitudeX * Math.cos(phase[i]!) + e.offsetX + noise * random.gaussian();
    y[i] = e.amplitudeY * Math.sin(phase[i]! + e.phaseErrorRad) + e.offsetY + noise * random.gaussian();
  }
  const u = new Float64Array(samples);
  const v = new Float64Array(samples);
  const unwrapped = new Float64Array(samples);
  const from = Math.floor((3 * samples) / 4);

  const accumulator = createEllipseAccumulator();
  accumulator.add(x, y, 20_000);
  const start = createEllipseFit({ method: 'hyper' }).solve(accumulator);
  if (!start.ok) throw new Error(`drift scenario: the starting fit failed: ${start.message}`);
  createCorrection({ calibration: start.calibration }).process(x, y, u, v, samples);
  unwrap(u, v, unwrapped, samples);
  const batchAtStart = periodicFigures(phase, unwrapped, from, samples);

  for (let i = 0; i < samples; i++) {
    const e = driftingEllipseAt(i / samples);
    const cu = (x[i]! - e.offsetX) / e.amplitudeX;
    u[i] = cu;
    v[i] = (y[i]! - e.offsetY) / e.amplitudeY / Math.cos(e.phaseErrorRad) - cu * Math.tan(e.phaseErrorRad);
  }
  unwrap(u, v, unwrapped, samples);
  const knownEllipse = periodicFigures(phase, unwrapped, from, samples);

  const block = 4096;
  const online = {} as DriftFigures['online'];
  let onlineNsPerSample = Number.NaN;
  for (const method of ['heydemann', 'hyper'] as const) {
    const stage = createOnlineCorrection({ calibration: start.calibration, method, forgettingSamples: 4096 });
    const started = process.hrtime.bigint();
    for (let i = 0; i < samples; i += block) {
      const length = Math.min(block, samples - i);
      stage.process(x.subarray(i, i + length), y.subarray(i, i + length), u.subarray(i, i + length), v.subarray(i, i + length), length);
    }
    if (method === 'hyper') onlineNsPerSample = Number(process.hrtime.bigint() - started) / samples;
    unwrap(u, v, unwrapped, samples);
    online[method] = { ...periodicFigures(phase, unwrapped, from, samples), updates: stage.status.updates, refused: stage.status.refused };
  }

  // Steady state: the same blocks over and over; heap growth measured between two forced collections.
  const gc = (globalThis as { gc?: () => void }).gc;
  let onlineHeapGrowthBytes = Number.NaN;
  if (gc !== undefined) {
    const stage = createOnlineCorrection({ calibration: start.calibration, forgettingSamples: 4096 });
    const views = [];
    for (let i = 0; i + block <= samples; i += block) views.push([x.subarray(i, i + block), y.subarray(i, i + block)] as const);
    const bu = new Float64Array(block);
    const bv = new Float64Array(block);
    for (const [bx, by] of views) stage.process(bx, by, bu, bv, block);
    gc();
    const before = process.memoryUsage().heapUsed;
    for (let pass = 0; pass < 5; pass++) for (const [bx, by] of views) stage.process(bx, by, bu, bv, block);
    gc();
    onlineHeapGrowthBytes = process.memoryUsage().heapUsed - before;
  }

  return {
    samples,
    driftPercent: { offsetX: 5, offsetY: 5, amplitudeX: 5, amplitudeY: -4.4 },
    batchAtStart,
    online,
    knownEllipse,
    onlineNsPerSample,
    onlineHeapGrowthBytes,
  };
}

export function runAccuracyBenchmark(options: AccuracyOptions = {}): AccuracyResult {
  const started = process.hrtime.bigint();
  const seeds = options.seeds ?? 300;
  const fitSamples = options.fitSamples ?? 20_000;
  const conditions: ConditionFigures[] = [];
  for (const noise of [0.01, 0.02, 0.03]) {
    for (const arc of [0.5, 0.75, 1]) conditions.push(runCondition(noise, arc, seeds, fitSamples));
  }
  const drift = runDrift(options.driftSamples ?? 400_000);
  const real = runRealRecordings();
  const ghost = runGhostBeam();
  return { truth: TRUTH, fitSamples, conditions, drift, real, ghost, seconds: Number(process.hrtime.bigint() - started) / 1e9 };
}

export function formatAccuracyTable(result: AccuracyResult): string {
  const lines: string[] = [];
  const e = (value: number) => value.toExponential(2).padStart(10);
  lines.push(`ellipse fits: truth ${JSON.stringify(result.truth)}, ${result.fitSamples} samples per fit, ${result.conditions[0]!.trials} seeds per condition`);
  lines.push('bias (mean error) and RMS error in units of the radius (phase error in rad); periodic error in rad, p-p also in nm (633 nm, fold 2)');
  lines.push(
    'noise arc  method     ' +
      PARAMETERS.map((p) => `bias ${p}`.padStart(19)).join('') +
      '   rms aX     rms aY     rms e  ' +
      '  intr 1st   intr 2nd  intr p-p nm  meas 1st   meas 2nd  meas p-p nm fail',
  );
  for (const condition of result.conditions) {
    const rows = [...condition.methods.map((m) => ({ label: m.method, m })), { label: 'true', m: null }];
    for (const { label, m } of rows) {
      const head = `${(condition.noiseOfRadius * 100).toFixed(0)}%    ${condition.arcFringes.toFixed(2)} ${label.padEnd(10)}`;
      if (m === null) {
        const f = condition.floor;
        lines.push(head + ' '.repeat(19 * 5 + 33) + `${e(0)} ${e(0)} ${e(0).padStart(12)} ${e(f.firstHarmonicRad)} ${e(f.secondHarmonicRad)} ${f.peakToPeakNm.toFixed(3).padStart(12)}`);
        continue;
      }
      lines.push(
        head +
          PARAMETERS.map((p) => e(m.bias[p]).padStart(19)).join('') +
          ` ${e(m.rms.amplitudeX)} ${e(m.rms.amplitudeY)} ${e(m.rms.phaseErrorRad)}` +
          ` ${e(m.intrinsic.firstHarmonicRad)} ${e(m.intrinsic.secondHarmonicRad)} ${m.intrinsic.peakToPeakNm.toFixed(3).padStart(12)}` +
          ` ${e(m.measured.firstHarmonicRad)} ${e(m.measured.secondHarmonicRad)} ${m.measured.peakToPeakNm.toFixed(3).padStart(12)} ${String(m.failedFits).padStart(4)}`,
      );
    }
  }
  const d = result.drift;
  lines.push('');
  lines.push(`drifting ellipse (${d.samples} samples, 250 per fringe, noise 1 %; offsets +5 %, gains +5 % / −4.4 % over the run): periodic error over the last quarter`);
  const row = (label: string, f: PeriodicFigures, extra = '') =>
    `  ${label.padEnd(22)} 1st ${e(f.firstHarmonicRad)} rad  2nd ${e(f.secondHarmonicRad)} rad  p-p ${f.peakToPeakNm.toFixed(3).padStart(8)} nm${extra}`;
  lines.push(row('batch fit at start', d.batchAtStart));
  for (const method of ['heydemann', 'hyper'] as const) {
    const o = d.online[method];
    lines.push(row(`online (${method})`, o, `  updates ${o.updates}, refused ${o.refused}`));
  }
  lines.push(row('known ellipse', d.knownEllipse));
  lines.push(`  online stage: ${d.onlineNsPerSample.toFixed(1)} ns/sample, heap growth over 5 steady passes ${d.onlineHeapGrowthBytes} bytes`);
  lines.push('');
  lines.push(formatRealRecordings(result.real));
  lines.push('');
  lines.push(formatGhostBeam(result.ghost));
  lines.push(`total ${result.seconds.toFixed(1)} s`);
  return lines.join('\n');
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href) {
  const { values } = parseArgs({
    options: {
      json: { type: 'boolean', default: false },
      seeds: { type: 'string', default: '300' },
      'fit-samples': { type: 'string', default: '20000' },
    },
  });
  const result = runAccuracyBenchmark({ seeds: Number(values.seeds), fitSamples: Number(values['fit-samples']) });
  process.stdout.write(values.json ? JSON.stringify(result, null, 2) + '\n' : formatAccuracyTable(result) + '\n');
}
