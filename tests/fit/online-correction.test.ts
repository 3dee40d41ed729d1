// Checks of the drift-tracking online correction on invented synthetic captures. Sources: Heydemann, Appl. Opt.
// 20(19), 1981 (published): the model and correction; docs/references.md (common practice): RLS with exponential
// forgetting is the exact online form of the batch fit, so a drift slow beside its memory is followed with a lag of
// about the memory; small-error sizes: an offset error of ε·R gives a once-per-fringe error of ε rad (derived).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createCorrection, createEllipseAccumulator, createPeriodicErrorAnalyzer, createRandom, OptionError, wrapPhase, type EllipseCalibration } from '../../src/core/index.js';
import { createEllipseFit } from '../../src/core/fit/methods.js';
import { createOnlineCorrection, type OnlineCorrectionOptions } from '../../src/core/fit/online.js';

const STEP_RAD = (2 * Math.PI) / 250; // constant velocity: 250 samples per fringe
const NOISE = 0.01;

/** Offsets +5 % of the radius, gains +5 % and −4.4 %, quadrature error +0.02 rad, linearly over the run. */
function driftingAt(t: number): EllipseCalibration {
  return { offsetX: 0.05 + 0.05 * t, offsetY: -0.03 + 0.05 * t, amplitudeX: 1 + 0.05 * t, amplitudeY: 0.9 - 0.04 * t, phaseErrorRad: 0.05 + 0.02 * t };
}

function driftingCapture(samples: number, seed = 7) {
  const phase = new Float64Array(samples);
  const x = new Float64Array(samples);
  const y = new Float64Array(samples);
  const random = createRandom(seed);
  for (let i = 0; i < samples; i++) {
    const e = driftingAt(i / samples);
    phase[i] = 0.3 + STEP_RAD * i;
    x[i] = e.amplitudeX * Math.cos(phase[i]!) + e.offsetX + NOISE * random.gaussian();
    y[i] = e.amplitudeY * Math.sin(phase[i]! + e.phaseErrorRad) + e.offsetY + NOISE * random.gaussian();
  }
  return { phase, x, y };
}

function unwrapped(u: Float64Array, v: Float64Array): Float64Array {
  const out = new Float64Array(u.length);
  let previous = Math.atan2(v[0]!, u[0]!);
  out[0] = previous;
  for (let i = 1; i < u.length; i++) {
    const phase = Math.atan2(v[i]!, u[i]!);
    out[i] = out[i - 1]! + wrapPhase(phase - previous);
    previous = phase;
  }
  return out;
}

/** First- and second-harmonic amplitudes of (reported − true) phase against the true phase, over [from, end). */
function periodic(phase: Float64Array, reported: Float64Array, from: number) {
  const analyzer = createPeriodicErrorAnalyzer();
  const error = new Float64Array(phase.length - from);
  for (let i = from; i < phase.length; i++) error[i - from] = reported[i]! - phase[i]!;
  analyzer.add(phase.subarray(from), error, error.length);
  const s = analyzer.summary();
  return { first: s.firstHarmonicRad, second: s.secondHarmonicRad };
}

function runOnline(options: OnlineCorrectionOptions, x: Float64Array, y: Float64Array, block: number) {
  const stage = createOnlineCorrection(options);
  const u = new Float64Array(x.length);
  const v = new Float64Array(x.length);
  const offsets: number[] = [];
  for (let i = 0; i < x.length; i += block) {
    const length = Math.min(block, x.length - i);
    const before = stage.status.updates;
    stage.process(x.subarray(i, i + length), y.subarray(i, i + length), u.subarray(i, i + length), v.subarray(i, i + length), length);
    if (stage.status.updates > before) offsets.push(stage.status.lastUpdateOffsetRad);
  }
  return { stage, u, v, offsets };
}

function knownEllipsePhase(x: Float64Array, y: Float64Array): Float64Array {
  const u = new Float64Array(x.length);
  const v = new Float64Array(x.length);
  for (let i = 0; i < x.length; i++) {
    const e = driftingAt(i / x.length);
    u[i] = (x[i]! - e.offsetX) / e.amplitudeX;
    v[i] = (y[i]! - e.offsetY) / e.amplitudeY / Math.cos(e.phaseErrorRad) - u[i]! * Math.tan(e.phaseErrorRad);
  }
  return unwrapped(u, v);
}

describe('drifting ellipse', () => {
  const samples = 200_000;
  const { phase, x, y } = driftingCapture(samples);
  const accumulator = createEllipseAccumulator();
  accumulator.add(x, y, 20_000);
  const start = createEllipseFit({ method: 'hyper' }).solve(accumulator);
  if (!start.ok) throw new Error(start.message);
  const lastQuarter = (3 * samples) / 4;

  it('keeps the periodic error near the known-ellipse value while a batch fit made at the start gets worse', () => {
    const known = periodic(phase, knownEllipsePhase(x, y), lastQuarter);
    const u = new Float64Array(samples);
    const v = new Float64Array(samples);
    createCorrection({ calibration: start.calibration }).process(x, y, u, v, samples);
    const batch = periodic(phase, unwrapped(u, v), lastQuarter);
    const online = runOnline({ calibration: start.calibration, forgettingSamples: 4096 }, x, y, 4096);
    const tracked = periodic(phase, unwrapped(online.u, online.v), lastQuarter);
    // The batch fit is ~5 % of the radius off by the end: once-per-fringe error of order 0.05 rad (derived).
    expect(batch.first).toBeGreaterThan(0.03);
    expect(known.first).toBeLessThan(3e-4);
    // Online: lag of about one memory (4096 of 200000 samples) of a 5 % drift ≈ 1e-3 rad; the margin is 20×.
    expect(tracked.first - known.first).toBeLessThan(0.05 * (batch.first - known.first));
    expect(tracked.second - known.second).toBeLessThan(0.05 * (batch.second - known.second));
    expect(online.stage.status.updates).toBeGreaterThan(150);
    const final = online.stage.calibration;
    const truth = driftingAt(1);
    expect(Math.abs(final.offsetX - truth.offsetX)).toBeLessThan(5e-3);
    expect(Math.abs(final.amplitudeY - truth.amplitudeY)).toBeLessThan(5e-3);
  });

  it('is bumpless: an update carries its phase offset and blends it out, so the position never jumps', () => {
    const known = knownEllipsePhase(x, y);
    // Start 4 % of the radius off in x, so the first update changes the phase by tens of mrad.
    const wrong = { ...start.calibration, offsetX: start.calibration.offsetX + 0.04 };
    const largestStep = (u: Float64Array, v: Float64Array) => {
      // Against the known-ellipse phase the noise cancels, leaving the correction's own changes.
      const reported = unwrapped(u, v);
      let largest = 0;
      for (let i = 1; i < samples; i++) largest = Math.max(largest, Math.abs(reported[i]! - known[i]! - (reported[i - 1]! - known[i - 1]!)));
      return largest;
    };
    // Without updates, (reported − known) still changes from sample to sample: the slope of the wrong calibration's
    // periodic error (0.04 rad at 0.025 rad per step) and its different weighting of the noise.
    const u = new Float64Array(samples);
    const v = new Float64Array(samples);
    createCorrection({ calibration: wrong }).process(x, y, u, v, samples);
    const withoutUpdates = largestStep(u, v);
    const blended = runOnline({ calibration: wrong, forgettingSamples: 4096 }, x, y, 1000);
    const firstOffset = Math.abs(blended.offsets[0]!);
    expect(firstOffset).toBeGreaterThan(0.01);
    // The blend adds at most firstOffset / blendSamples (4e-5 rad) per sample.
    expect(largestStep(blended.u, blended.v)).toBeLessThan(withoutUpdates + 2e-4);
    const abrupt = runOnline({ calibration: wrong, forgettingSamples: 4096, blendSamples: 1 }, x, y, 1000);
    expect(largestStep(abrupt.u, abrupt.v)).toBeGreaterThan(withoutUpdates + 0.5 * firstOffset);
  });
});

describe('coverage gate', () => {
  const calibration = driftingAt(0);
  it('does not update while the stage stands still or moves over less than the required arc', () => {
    const samples = 60_000;
    const random = createRandom(3);
    for (const motion of [(i: number) => 1.0 + 0 * i, (i: number) => 1.5 * Math.sin(i / 2000)]) {
      const x = new Float64Array(samples);
      const y = new Float64Array(samples);
      for (let i = 0; i < samples; i++) {
        const phase = motion(i);
        x[i] = calibration.amplitudeX * Math.cos(phase) + calibration.offsetX + NOISE * random.gaussian();
        y[i] = calibration.amplitudeY * Math.sin(phase + calibration.phaseErrorRad) + calibration.offsetY + NOISE * random.gaussian();
      }
      const { stage } = runOnline({ calibration, forgettingSamples: 4096 }, x, y, 4096);
      expect(stage.status.updates).toBe(0);
      expect(stage.status.refused).toBeGreaterThan(40);
      expect(stage.status.coverage).toBeLessThan(0.9);
      expect(stage.calibration).toEqual(calibration);
    }
  });
});

describe('stage properties', () => {
  const { x, y } = driftingCapture(30_000, 11);
  const options: OnlineCorrectionOptions = { calibration: driftingAt(0), forgettingSamples: 2048, updateIntervalSamples: 512, blendSamples: 300 };

  it('gives the same output for any split of the input into blocks', () => {
    const whole = runOnline(options, x, y, x.length);
    expect(whole.stage.status.updates).toBeGreaterThan(10);
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 1, max: 5000 }), { minLength: 1, maxLength: 40 }), (sizes) => {
        const stage = createOnlineCorrection(options);
        const u = new Float64Array(x.length);
        const v = new Float64Array(x.length);
        let i = 0;
        for (let k = 0; i < x.length; k++) {
          const length = Math.min(sizes[k % sizes.length]!, x.length - i);
          stage.process(x.subarray(i, i + length), y.subarray(i, i + length), u.subarray(i, i + length), v.subarray(i, i + length), length);
          i += length;
        }
        expect(u).toEqual(whole.u);
        expect(v).toEqual(whole.v);
      }),
      { numRuns: 8, seed: 31 },
    );
  });

  it('reset() behaves like a new stage', () => {
    const fresh = runOnline(options, x, y, 4096);
    const stage = fresh.stage;
    stage.reset();
    expect(stage.calibration).toEqual(options.calibration);
    expect(stage.status).toMatchObject({ samples: 0, updates: 0, refused: 0, lastUpdateSampleIndex: -1 });
    const u = new Float64Array(x.length);
    const v = new Float64Array(x.length);
    stage.process(x, y, u, v, x.length);
    expect(u).toEqual(fresh.u);
    expect(v).toEqual(fresh.v);
  });

  it('rejects invalid options naming the option, the rule and the value', () => {
    const calibration = driftingAt(0);
    const cases: [Record<string, unknown>, string][] = [
      [{ calibration, forgettingSamples: 5 }, 'forgettingSamples must be a number >= 100 (got 5)'],
      [{ calibration, minCoverage: 0.1 }, 'minCoverage must be a number in [0.25, 1] (got 0.1)'],
      [{ calibration, blendSamples: 0 }, 'blendSamples must be an integer in 1..2147483648 (got 0)'],
      [{ calibration, updateIntervalSamples: 2.5 }, 'updateIntervalSamples must be an integer in 16..2147483648 (got 2.5)'],
      [{ calibration, method: 'ransac' }, 'method must be one of "heydemann", "taubin", "hyper" (got "ransac")'],
      [{ calibration, maxChange: 0 }, 'maxChange must be a number in (0, 1] (got 0)'],
      [{ calibration: { ...calibration, amplitudeY: -1 } }, 'calibration.amplitudeY must be a positive finite number (got -1)'],
      [{}, 'calibration must be an ellipse calibration record (the starting ellipse) (got undefined)'],
    ];
    for (const [value, message] of cases) {
      expect(() => createOnlineCorrection(value as never)).toThrow(OptionError);
      expect(() => createOnlineCorrection(value as never)).toThrow(message);
    }
  });
});
