// Checks of the front ends (src/accel: WebAssembly SIMD kernels, fused JavaScript loop) against the JavaScript
// stages and Math.atan2.
// Reference values: Math.atan2 and Math.sqrt of the ECMAScript library (ECMA-262, §21.3.2), and the
// plain-JS pipeline of src/core for positions, flags and events. λ_vac = 632.9908 nm (unstabilised He-Ne).
import { afterEach, describe, expect, it, vi } from 'vitest';
import fc from 'fast-check';
import {
  createPipeline,
  createQuadratureSynthesizer,
  fastAtan2,
  type AlarmEvent,
  type EllipseCalibration,
  type FrontEnd,
  type PipelineOptions,
} from '../../src/core/index.js';
import * as packageRoot from '../../src/index.js';
import { correctionCoefficients } from '../../src/core/correction.js';
import {
  createExactFrontEnd,
  createFusedFrontEnd,
  createPipeline as createDefaultPipeline,
  createWasmFrontEnd,
  F32_MAX_LEVEL_RELATIVE_ERROR,
  F32_MAX_PHASE_ERROR_RAD,
  type WasmFrontEnd,
  type WasmFrontEndPrecision,
} from '../../src/accel/index.js';

const HE_NE_M = 632.9908e-9;
const RATE_HZ = 1e6;
const ellipse: EllipseCalibration = { offsetX: 900, offsetY: -600, amplitudeX: 12000, amplitudeY: 10500, phaseErrorRad: 0.08 };
const baseOptions: PipelineOptions = { rateHz: RATE_HZ, wavelengthM: HE_NE_M, fold: 2, calibration: ellipse, adc: { kind: 'int16' } };
const METRES_PER_RAD = HE_NE_M / 2 / (2 * Math.PI);
const NO_GUARD = 10; // a step guard beyond any wrapped step (π): the step check never declines

function frontEnd(precision: WasmFrontEndPrecision): WasmFrontEnd {
  const made = createWasmFrontEnd({ precision });
  if (made === null) throw new Error('WebAssembly SIMD is missing in this Node: the accel tests need it');
  return made;
}

function wrappedDifference(a: number, b: number): number {
  const d = Math.abs(a - b);
  return d > Math.PI ? 2 * Math.PI - d : d; // ±π are the same angle
}

/** Codes on a dense grid of angles and radii (in units of the calibrated radius), through `calibration`. */
function codeGrid(calibration: EllipseCalibration, angles: number, radii: readonly number[]) {
  const x = new Int16Array(angles * radii.length);
  const y = new Int16Array(angles * radii.length);
  let n = 0;
  for (const radius of radii) {
    for (let k = 0; k < angles; k++) {
      const angle = -Math.PI + (2 * Math.PI * k) / angles;
      x[n] = Math.round(calibration.offsetX + radius * calibration.amplitudeX * Math.cos(angle));
      y[n] = Math.round(calibration.offsetY + radius * calibration.amplitudeY * Math.sin(angle + calibration.phaseErrorRad));
      n++;
    }
  }
  return { x, y };
}

/** The JavaScript stages' level and u, v for codes (correction.ts, monitor.ts). */
function reference(c: Float64Array, xi: number, yi: number) {
  const u = c[0]! * xi + c[1]!;
  const v = c[2]! * xi + c[3]! * yi + c[4]!;
  return { u, v, level: Math.sqrt(u * u + v * v) };
}

function runFront(front: FrontEnd, x: Int16Array, y: Int16Array, c: Float64Array, guard = NO_GUARD) {
  const level = new Float32Array(x.length);
  const result = front.process(x, y, x.length, c, -32768, 32767, 0.3, level, -Math.PI, guard); // grids start at −π
  const phase = result === null ? null : result.slice(0, x.length);
  return { result, level, phase };
}

describe('f32 kernel accuracy', () => {
  it(`stays within F32_MAX_PHASE_ERROR_RAD of Math.atan2 and of fastAtan2, and within its level error, on a dense grid`, () => {
    const front = frontEnd('f32');
    let worstAtan2 = 0;
    let worstFast = 0;
    let worstLevel = 0;
    for (const calibration of [ellipse, { offsetX: -1000, offsetY: 1500, amplitudeX: 28000, amplitudeY: 26000, phaseErrorRad: -0.3 }]) {
      const c = correctionCoefficients(calibration, new Float64Array(5));
      const { x, y } = codeGrid(calibration, 200_000, [0.35, 0.7, 1, 1.05]);
      const { result, level, phase } = runFront(front, x, y, c);
      expect(result).toBeInstanceOf(Float64Array);
      for (let i = 0; i < x.length; i++) {
        const r = reference(c, x[i]!, y[i]!);
        worstAtan2 = Math.max(worstAtan2, wrappedDifference(phase![i]!, Math.atan2(r.v, r.u)));
        worstFast = Math.max(worstFast, wrappedDifference(phase![i]!, fastAtan2(r.v, r.u)));
        worstLevel = Math.max(worstLevel, Math.abs(level[i]! - r.level) / r.level);
      }
    }
    expect(worstAtan2).toBeLessThanOrEqual(F32_MAX_PHASE_ERROR_RAD);
    expect(worstFast).toBeLessThanOrEqual(F32_MAX_PHASE_ERROR_RAD);
    expect(worstLevel).toBeLessThanOrEqual(F32_MAX_LEVEL_RELATIVE_ERROR);
    // The bounds are within a factor of 4 of what is measured: tight enough to mean something.
    expect(worstAtan2).toBeGreaterThan(F32_MAX_PHASE_ERROR_RAD / 4);
    expect(worstLevel).toBeGreaterThan(F32_MAX_LEVEL_RELATIVE_ERROR / 100);
    // Position at 633 nm, fold 2: under 0.02 pm.
    expect(worstAtan2 * METRES_PER_RAD).toBeLessThan(0.02e-12);
  });

  it('the f64 kernel gives the JavaScript stages\' level (as float32) and fastAtan2 phase to the bit', () => {
    const front = frontEnd('f64-exact');
    const c = correctionCoefficients(ellipse, new Float64Array(5));
    const { x, y } = codeGrid(ellipse, 100_000, [0.35, 1, 1.1]);
    const { result, level, phase } = runFront(front, x, y, c);
    expect(result).toBeInstanceOf(Float64Array);
    let differences = 0;
    for (let i = 0; i < x.length; i++) {
      const r = reference(c, x[i]!, y[i]!);
      if (!Object.is(level[i], Math.fround(r.level)) || !Object.is(phase![i], fastAtan2(r.v, r.u))) differences++;
    }
    expect(differences).toBe(0);
    // The same codes as Float64Array samples: the same levels and phases.
    const wideLevel = new Float32Array(x.length);
    const wide = front.process(Float64Array.from(x), Float64Array.from(y), x.length, c, -32768, 32767, 0.3, wideLevel, -Math.PI, NO_GUARD);
    expect(firstDifference(wideLevel, level)).toBe(-1);
    expect(firstDifference(wide!.slice(0, x.length), phase!)).toBe(-1);
  });
});

describe('decline checks', () => {
  const c = correctionCoefficients(ellipse, new Float64Array(5));
  const quietBlock = () => codeGrid(ellipse, 4000, [1]); // steps of 2π/4000 rad

  for (const precision of ['f32', 'f64-exact'] as const) {
    it(`${precision}: accepts a quiet block, declines saturation, a low level and other sample types`, () => {
      const front = frontEnd(precision);
      const { x, y } = quietBlock();
      expect(runFront(front, x, y, c).result).toBeInstanceOf(Float64Array);
      for (const code of [32767, -32768]) {
        const saturated = x.slice();
        saturated[1234] = code;
        expect(runFront(front, saturated, y, c).result).toBeNull();
        const saturatedY = y.slice();
        saturatedY[3999] = code; // the last sample: the padding must not hide it
        expect(runFront(front, x, saturatedY, c).result).toBeNull();
      }
      const blocked = x.slice();
      const blockedY = y.slice();
      blocked.fill(ellipse.offsetX, 100, 110);
      blockedY.fill(ellipse.offsetY, 100, 110);
      expect(runFront(front, blocked, blockedY, c).result).toBeNull();
      // Float64Array blocks only in the exact kernel; Float32Array in neither.
      const level = new Float32Array(10);
      const wide = front.process(Float64Array.from(x.subarray(0, 10)), Float64Array.from(y.subarray(0, 10)), 10, c, -32768, 32767, 0.3, level, 0, NO_GUARD);
      if (precision === 'f64-exact') expect(wide).toBeInstanceOf(Float64Array);
      else expect(wide).toBeNull();
      expect(front.process(Float32Array.from(x.subarray(0, 10)), Float32Array.from(y.subarray(0, 10)), 10, c, -32768, 32767, 0.3, level, 0, NO_GUARD)).toBeNull();
    });
  }

  it('f32: declines a level within its margin above the threshold, which the f64 kernel accepts', () => {
    // Scan codes near the threshold for one whose exact level lies in [0.3, 0.300001): float32 could misjudge it.
    let found: { xi: number; yi: number } | null = null;
    for (let k = 0; k < 100_000 && found === null; k++) {
      const angle = 0.4 + 1e-5 * k;
      const radius = 0.2999 + 2e-4 * ((k * 0.618034) % 1);
      const xi = Math.round(ellipse.offsetX + radius * ellipse.amplitudeX * Math.cos(angle));
      const yi = Math.round(ellipse.offsetY + radius * ellipse.amplitudeY * Math.sin(angle + ellipse.phaseErrorRad));
      const { level } = reference(c, xi, yi);
      if (level >= 0.3 && level < 0.300001) found = { xi, yi };
    }
    expect(found).not.toBeNull();
    const { x, y } = quietBlock();
    x[2000] = found!.xi;
    y[2000] = found!.yi;
    x[1999] = x[2001] = found!.xi; // neighbours at the same angle: small steps
    y[1999] = y[2001] = found!.yi;
    expect(runFront(frontEnd('f32'), x, y, c).result).toBeNull();
    expect(runFront(frontEnd('f64-exact'), x, y, c).result).toBeInstanceOf(Float64Array);
  });

  it('f32: declines a step at the guard, a first step from the previous phase, and every block without a guard', () => {
    const front = frontEnd('f32');
    const { x, y } = quietBlock();
    expect(runFront(front, x, y, c, 1.4).result).toBeInstanceOf(Float64Array);
    // One large step: sample 2000 moved by 1.4 rad.
    const angle = -Math.PI + (2 * Math.PI * 2000) / 4000 + 1.4;
    const jumped = x.slice();
    const jumpedY = y.slice();
    jumped[2000] = Math.round(ellipse.offsetX + ellipse.amplitudeX * Math.cos(angle));
    jumpedY[2000] = Math.round(ellipse.offsetY + ellipse.amplitudeY * Math.sin(angle + ellipse.phaseErrorRad));
    expect(runFront(front, jumped, jumpedY, c, 1.4).result).toBeNull();
    expect(runFront(front, jumped, jumpedY, c, 1.5).result).toBeInstanceOf(Float64Array);
    // The first step is taken from lastPhaseRad: the grid starts at −π.
    const level = new Float32Array(4000);
    expect(front.process(x, y, 4000, c, -32768, 32767, 0.3, level, Math.PI - 0.01, 1.4)).toBeInstanceOf(Float64Array);
    expect(front.process(x, y, 4000, c, -32768, 32767, 0.3, level, 1.5, 1.4)).toBeNull();
    // Guard 0: what the pipeline passes for velocity-aided unwrapping.
    expect(runFront(front, x, y, c, 0).result).toBeNull();
    expect(runFront(frontEnd('f64-exact'), x, y, c, 0).result).toBeInstanceOf(Float64Array);
  });
});

/**
 * An invented run with every alarm: moderate motion, a blocked beam, saturation, a stretch at steps just under
 * and over the overspeed threshold (π/2 rad per sample), and steps close to the f32 kernel's step guard.
 */
function alarmSignal(n: number, seed: number) {
  const phase = new Float64Array(n);
  let p = 0.3;
  for (let i = 0; i < n; i++) {
    const speed =
      i >= 20_000 && i < 20_400 ? 1.9 : // overspeed
      i >= 26_000 && i < 27_000 ? 0.9 * (Math.PI / 2) + 1e-4 * Math.sin(i) : // at the guard
      i >= 30_000 && i < 31_000 ? 1.3 : // fast, under the guard
      0.02 + 0.01 * Math.sin(i / 3000);
    p += speed;
    phase[i] = p;
  }
  const x = new Int16Array(n);
  const y = new Int16Array(n);
  createQuadratureSynthesizer({ ellipse, noiseRms: 30, adc: { kind: 'int16' }, seed }).process(phase, x, y, n);
  x.fill(ellipse.offsetX, 8000, 8600); // blocked beam
  y.fill(ellipse.offsetY, 8000, 8600);
  x[14_000] = 32767; // saturation
  y[14_500] = -32768;
  return { x, y };
}

function runPipeline(
  x: Int16Array | Float32Array | Float64Array,
  y: Int16Array | Float32Array | Float64Array,
  options: PipelineOptions,
  split: readonly number[],
  create: typeof createPipeline = createPipeline,
) {
  const pipeline = create(options);
  const n = x.length;
  const out = { positionM: new Float64Array(n), velocityMS: new Float64Array(n), level: new Float32Array(n), flags: new Uint8Array(n), unwrappedPhaseRad: new Float64Array(n) };
  const events: AlarmEvent[] = [];
  let start = 0;
  for (const end of [...split, n]) {
    pipeline.process(x.subarray(start, end), y.subarray(start, end), end - start, {
      positionM: out.positionM.subarray(start, end),
      velocityMS: out.velocityMS.subarray(start, end),
      level: out.level.subarray(start, end),
      flags: out.flags.subarray(start, end),
      unwrappedPhaseRad: out.unwrappedPhaseRad.subarray(start, end),
    }, events);
    start = end;
  }
  return { out, events };
}

type Run = ReturnType<typeof runPipeline>;

/** Index of the first element that differs (by Object.is, as toEqual compares numbers), or −1. */
function firstDifference(a: ArrayLike<number>, b: ArrayLike<number>): number {
  if (a.length !== b.length) return Math.min(a.length, b.length);
  for (let i = 0; i < a.length; i++) if (!Object.is(a[i], b[i])) return i;
  return -1;
}

/** The same outputs to the bit and the same events; a plain loop, as toEqual on typed arrays takes seconds here. */
function expectSameRun(actual: Run, expected: Run): void {
  for (const key of Object.keys(expected.out) as (keyof Run['out'])[]) {
    expect({ key, firstDifference: firstDifference(actual.out[key], expected.out[key]) }).toEqual({ key, firstDifference: -1 });
  }
  expect(actual.events).toEqual(expected.events);
}

/** Counts calls and accepted blocks of a front end. */
function counting(front: FrontEnd) {
  const counts = { calls: 0, accepted: 0 };
  const wrapped: FrontEnd = {
    process(...args: Parameters<FrontEnd['process']>) {
      counts.calls++;
      const result = front.process(...args);
      if (result !== null) counts.accepted++;
      return result;
    },
  };
  return { wrapped, counts };
}

const N = 40_000;
const splitArbitrary = fc.uniqueArray(fc.integer({ min: 1, max: N - 1 }), { maxLength: 12 }).map((cuts) => [...cuts].sort((a, b) => a - b));

/** The alarm signal as Float64Array samples, with a NaN and infinities besides (bad samples). */
function floatAlarmSignal(n: number, seed: number) {
  const ints = alarmSignal(n, seed);
  const x = Float64Array.from(ints.x);
  const y = Float64Array.from(ints.y);
  x[12_345] = Number.NaN;
  y[16_000] = Number.POSITIVE_INFINITY;
  x[33_000] = Number.NEGATIVE_INFINITY;
  return { x, y };
}
const floatOptions: PipelineOptions = { ...baseOptions, adc: { kind: 'float', fullScale: 32768 } };

/**
 * For any block split of an alarm signal (int16, or float64 with `float`), a pipeline with a fresh front end from
 * `make` gives the plain pipeline's outputs and events to the bit; the front end both accepted quiet blocks and
 * declined alarm ones.
 */
function expectExactForAnySplit(make: () => FrontEnd, seed: number, float = false): void {
  const { x, y } = float ? floatAlarmSignal(N, seed) : alarmSignal(N, seed);
  const options = float ? floatOptions : baseOptions;
  let accepted = 0;
  let declined = 0;
  fc.assert(
    fc.property(splitArbitrary, (split) => {
      const { wrapped, counts } = counting(make());
      expectSameRun(runPipeline(x, y, { ...options, frontEnd: wrapped }, split), runPipeline(x, y, options, split));
      accepted += counts.accepted;
      declined += counts.calls - counts.accepted;
    }),
    { numRuns: float ? 8 : 15 },
  );
  expect(accepted).toBeGreaterThan(0);
  expect(declined).toBeGreaterThan(0); // alarm blocks went to the stages
}

describe('accelerated pipeline', () => {
  it('f64-exact: positions, flags and events identical to the plain pipeline for any block split', () => {
    expectExactForAnySplit(() => frontEnd('f64-exact'), 3);
  });

  it('f64-exact on Float64Array samples, NaN and infinities among them: identical to the plain pipeline for any block split', () => {
    expectExactForAnySplit(() => frontEnd('f64-exact'), 15, true);
  });

  it('f32: identical flags and event kinds and indices, position within twice the stated phase error, for any block split', () => {
    const { x, y } = alarmSignal(N, 4);
    const positionBound = 2 * F32_MAX_PHASE_ERROR_RAD * METRES_PER_RAD + 1e-18; // sample and reference phases
    let worstPosition = 0;
    let worstPhase = 0;
    let levelsOutOfBound = 0;
    let accepted = 0;
    let declined = 0;
    fc.assert(
      fc.property(splitArbitrary, (split) => {
        const plain = runPipeline(x, y, baseOptions, split);
        const { wrapped, counts } = counting(frontEnd('f32'));
        const fast = runPipeline(x, y, { ...baseOptions, frontEnd: wrapped }, split);
        expect(firstDifference(fast.out.flags, plain.out.flags)).toBe(-1);
        expect(fast.events.map(({ kind, state, sampleIndex }) => ({ kind, state, sampleIndex })))
          .toEqual(plain.events.map(({ kind, state, sampleIndex }) => ({ kind, state, sampleIndex })));
        for (let i = 0; i < N; i++) {
          worstPosition = Math.max(worstPosition, Math.abs(fast.out.positionM[i]! - plain.out.positionM[i]!));
          worstPhase = Math.max(worstPhase, Math.abs(fast.out.unwrappedPhaseRad[i]! - plain.out.unwrappedPhaseRad[i]!));
          const level = plain.out.level[i]!;
          if (!(Math.abs(fast.out.level[i]! - level) <= F32_MAX_LEVEL_RELATIVE_ERROR * level)) levelsOutOfBound++;
        }
        accepted += counts.accepted;
        declined += counts.calls - counts.accepted;
      }),
      { numRuns: 15 },
    );
    expect(accepted).toBeGreaterThan(0);
    expect(declined).toBeGreaterThan(0);
    expect(levelsOutOfBound).toBe(0);
    expect(worstPosition).toBeLessThanOrEqual(positionBound);
    expect(worstPhase).toBeLessThanOrEqual(F32_MAX_PHASE_ERROR_RAD + 1e-12);
    expect(worstPhase).toBeGreaterThan(0); // the f32 kernel was in use, not only the stages
  });

  it('f32: the alarm events carry values within the stated error', () => {
    const { x, y } = alarmSignal(N, 5);
    const plain = runPipeline(x, y, baseOptions, [4096, 20_000, 26_500]);
    const fast = runPipeline(x, y, { ...baseOptions, frontEnd: frontEnd('f32') }, [4096, 20_000, 26_500]);
    expect(plain.events.length).toBeGreaterThanOrEqual(8); // low signal, saturation, overspeed, count lost, ...
    expect(new Set(plain.events.map((event) => event.kind))).toEqual(new Set(['lowSignal', 'saturation', 'overspeed', 'countLost']));
    expect(fast.events.length).toBe(plain.events.length);
    plain.events.forEach((event, i) => {
      const other = fast.events[i]!;
      expect({ ...other, value: 0 }).toEqual({ ...event, value: 0 });
      if (Number.isNaN(event.value)) expect(other.value).toBeNaN();
      else expect(Math.abs(other.value - event.value)).toBeLessThanOrEqual(2 * F32_MAX_PHASE_ERROR_RAD + 1e-6 * Math.abs(event.value));
    });
  });

  it('float samples with NaN and velocity-aided unwrapping under f32 take the stages: results identical', () => {
    const ints = alarmSignal(N, 6);
    const x = Float64Array.from(ints.x);
    const y = Float64Array.from(ints.y);
    x[17_000] = Number.NaN; // bad sample
    const { wrapped, counts } = counting(frontEnd('f32'));
    expectSameRun(runPipeline(x, y, { ...baseOptions, frontEnd: wrapped }, [10_000]), runPipeline(x, y, baseOptions, [10_000]));
    expect(counts.calls).toBeGreaterThan(0);
    expect(counts.accepted).toBe(0);
    const aided: PipelineOptions = { ...baseOptions, unwrap: 'velocity-aided' };
    const aidedFront = counting(frontEnd('f32'));
    expectSameRun(runPipeline(ints.x, ints.y, { ...aided, frontEnd: aidedFront.wrapped }, []), runPipeline(ints.x, ints.y, aided, []));
    expect(aidedFront.counts.accepted).toBe(0);
    // The exact kernel serves velocity-aided unwrapping.
    const exactFront = counting(frontEnd('f64-exact'));
    expectSameRun(runPipeline(ints.x, ints.y, { ...aided, frontEnd: exactFront.wrapped }, [5000]), runPipeline(ints.x, ints.y, aided, [5000]));
    expect(exactFront.counts.accepted).toBeGreaterThan(0);
  });

  it('blocks of any length, odd ones and longer than the reserved capacity, give the same results', () => {
    const { x, y } = alarmSignal(N, 7);
    const split = [1, 2, 5, 4101, 4102, 4103, 30_001]; // 1-, 3- and 25 898-sample blocks among them
    expectSameRun(runPipeline(x, y, { ...baseOptions, frontEnd: frontEnd('f64-exact') }, split), runPipeline(x, y, baseOptions, split));
  });
});

describe('fused JavaScript front end', () => {
  it('positions, levels, flags and events identical to the plain pipeline for any block split', () => {
    expectExactForAnySplit(() => createFusedFrontEnd(), 9);
  });

  it('float samples with NaN, velocity-aided unwrapping and blocks beyond its capacity: results identical', () => {
    const ints = alarmSignal(N, 10);
    const floats = { x: Float64Array.from(ints.x), y: Float64Array.from(ints.y) };
    floats.x[12_345] = Number.NaN;
    const split = [1, 2, 5, 4101, 30_001];
    const front = counting(createFusedFrontEnd({ capacity: 16 }));
    expectSameRun(runPipeline(floats.x, floats.y, { ...floatOptions, frontEnd: front.wrapped }, split), runPipeline(floats.x, floats.y, floatOptions, split));
    const aided: PipelineOptions = { ...baseOptions, unwrap: 'velocity-aided' };
    expectSameRun(runPipeline(ints.x, ints.y, { ...aided, frontEnd: front.wrapped }, split), runPipeline(ints.x, ints.y, aided, split));
    expect(front.counts.accepted).toBeGreaterThan(0);
  });
});

describe('default pipeline of the Node entry points', () => {
  it('is the package root\'s createPipeline, and its front end is the exact WebAssembly kernel plus the fused loop here', () => {
    expect(packageRoot.createPipeline).toBe(createDefaultPipeline);
    expect(createExactFrontEnd().kind).toBe('wasm-simd-f64-exact+js-fused');
  });

  it('without frontEnd gives the plain stages\' results (frontEnd: null) for int16 and float samples, any block split', () => {
    const ints = alarmSignal(N, 13);
    const floats = floatAlarmSignal(N, 13);
    fc.assert(
      fc.property(splitArbitrary, (split) => {
        const plain = { ...baseOptions, frontEnd: null };
        expectSameRun(runPipeline(ints.x, ints.y, baseOptions, split, createDefaultPipeline), runPipeline(ints.x, ints.y, plain, split));
        const floatPlain = { ...floatOptions, frontEnd: null };
        expectSameRun(runPipeline(floats.x, floats.y, floatOptions, split, createDefaultPipeline), runPipeline(floats.x, floats.y, floatPlain, split));
      }),
      { numRuns: 5 },
    );
    // Quiet blocks are accepted (int16 and float64 by the kernel, float32 by the fused loop), alarm blocks declined.
    const floats32 = { x: Float32Array.from(floats.x), y: Float32Array.from(floats.y) };
    for (const [signal, options] of [[ints, baseOptions], [floats, floatOptions], [floats32, floatOptions]] as const) {
      const { wrapped, counts } = counting(createExactFrontEnd());
      runPipeline(signal.x, signal.y, { ...options, frontEnd: wrapped }, [4096, 8192]);
      expect(counts.accepted).toBeGreaterThan(0);
      expect(counts.accepted).toBeLessThan(counts.calls);
    }
  });
});

describe('without WebAssembly', () => {
  afterEach(() => {
    vi.unstubAllGlobals();
  });

  it('createWasmFrontEnd returns null, and a pipeline given `?? undefined` runs the stages', () => {
    vi.stubGlobal('WebAssembly', undefined);
    const front = createWasmFrontEnd();
    expect(front).toBeNull();
    const { x, y } = alarmSignal(10_000, 8);
    const options: PipelineOptions = { ...baseOptions, frontEnd: front ?? undefined };
    expectSameRun(runPipeline(x, y, options, [4096]), runPipeline(x, y, baseOptions, [4096]));
  });

  it('createExactFrontEnd falls back to the fused loop, with the stages\' results', () => {
    vi.stubGlobal('WebAssembly', undefined);
    const front = createExactFrontEnd();
    expect(front.kind).toBe('js-fused');
    const { x, y } = alarmSignal(10_000, 14);
    expectSameRun(runPipeline(x, y, { ...baseOptions, frontEnd: front }, [4096]), runPipeline(x, y, baseOptions, [4096]));
  });

  it('`createWasmFrontEnd() ?? createFusedFrontEnd()` falls back to the fused loop, with the stages\' results', () => {
    vi.stubGlobal('WebAssembly', undefined);
    const { x, y } = alarmSignal(10_000, 11);
    const options: PipelineOptions = { ...baseOptions, frontEnd: createWasmFrontEnd() ?? createFusedFrontEnd() };
    expectSameRun(runPipeline(x, y, options, [4096]), runPipeline(x, y, baseOptions, [4096]));
  });
});
