// Checks of the signal chain: exact count, displacement scale, velocity, alarms and block-split invariance.
// Check values: v_max = λ·f_s/(2·N·n), 0.158 m/s at 1 MHz and N = 2 (common practice, docs/references.md);
// λ_vac = 632.9908 nm for an unstabilised He-Ne (CIPM Recommendation 2, 2007, published).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  AlarmBit,
  createDisplacement,
  createPhaseTracker,
  createPipeline,
  createQuadratureSynthesizer,
  fastAtan2,
  type AlarmEvent,
  type FrontEnd,
  type EllipseCalibration,
  type PipelineOptions,
} from '../../src/core/index.js';

const HE_NE_M = 632.9908e-9;
const ellipse: EllipseCalibration = { offsetX: 900, offsetY: -600, amplitudeX: 12000, amplitudeY: 10500, phaseErrorRad: 0.08 };
const baseOptions: PipelineOptions = { rateHz: 1e6, wavelengthM: HE_NE_M, fold: 2, calibration: ellipse };

function outputs(length: number) {
  return {
    positionM: new Float64Array(length),
    velocityMS: new Float64Array(length),
    level: new Float32Array(length),
    flags: new Uint8Array(length),
  };
}

/** Samples of a phase trajectory through `ellipse`, as int16 ADC codes unless noted. */
function signal(phase: Float64Array, options: { noiseRms?: number; quantise?: boolean } = {}) {
  const x = new Float64Array(phase.length);
  const y = new Float64Array(phase.length);
  createQuadratureSynthesizer({
    ellipse,
    noiseRms: options.noiseRms ?? 0,
    adc: options.quantise ? { kind: 'int16' } : null,
  }).process(phase, x, y, phase.length);
  return { x, y };
}

function run(x: Float64Array, y: Float64Array, options: PipelineOptions = baseOptions, split: number[] = []) {
  const pipeline = createPipeline(options);
  const out = outputs(x.length);
  const events: AlarmEvent[] = [];
  let start = 0;
  for (const end of [...split, x.length]) {
    const view = {
      positionM: out.positionM.subarray(start, end),
      velocityMS: out.velocityMS.subarray(start, end),
      level: out.level.subarray(start, end),
      flags: out.flags.subarray(start, end),
    };
    pipeline.process(x.subarray(start, end), y.subarray(start, end), end - start, view, events);
    start = end;
  }
  return { pipeline, out, events };
}

const metresPerFringe = HE_NE_M / 2;

describe('exact fringe count', () => {
  it('ends at the true position for any trajectory whose step stays under the limit, reversals included', () => {
    fc.assert(
      fc.property(
        fc.array(fc.double({ min: -0.7 * Math.PI, max: 0.7 * Math.PI, noNaN: true }), { minLength: 1, maxLength: 3000 }),
        fc.double({ min: -Math.PI, max: Math.PI, noNaN: true }),
        (steps, start) => {
          const phase = new Float64Array(steps.length + 1);
          phase[0] = start;
          for (let i = 0; i < steps.length; i++) phase[i + 1] = phase[i]! + steps[i]!;
          const { x, y } = signal(phase);
          const { out, events } = run(x, y);
          const truthM = ((phase[steps.length]! - start) / (2 * Math.PI)) * metresPerFringe;
          expect(Math.abs(out.positionM[steps.length]! - truthM)).toBeLessThan(1e-12);
          expect(events.filter((event) => event.kind === 'countLost')).toEqual([]);
        },
      ),
      { numRuns: 200 },
    );
  });

  it('keeps the count exact at billions of fringes: integer and fraction are differenced apart', () => {
    const tracker = createPhaseTracker({ rateHz: 1e6 });
    const displacement = createDisplacement({ wavelengthM: HE_NE_M, fold: 2, rateHz: 1e6 });
    const n = 1000;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.3 * i);
    const { x, y } = signal(phase);
    const pipeline = createPipeline(baseOptions);
    const u = new Float64Array(n);
    const v = new Float64Array(n);
    pipeline.stages.correction.process(x, y, u, v, n);
    const level = new Float32Array(n).fill(1);
    const turns = new Float64Array(n);
    const phaseRad = new Float64Array(n);
    const stepRad = new Float64Array(n);
    tracker.process(u, v, level, n, 0, { turns, phaseRad, stepRad, flags: new Uint8Array(n) }, []);
    const offsetTurns = 5_000_000_000; // 5e9 fringes, about 1.6 km of travel at fold 2
    const shifted = turns.map((t) => t + offsetTurns);
    const position = new Float64Array(n);
    displacement.process(shifted, phaseRad, stepRad, n, position, new Float64Array(n));
    const truthM = ((phase[n - 1]! - phase[0]!) / (2 * Math.PI)) * metresPerFringe;
    expect(Math.abs(position[n - 1]! - truthM)).toBeLessThan(1e-13);
    // The same offset through one double would keep only about 1e-6 fringe of the fraction.
    expect(Math.abs(((offsetTurns + 0.1234567891) - offsetTurns) - 0.1234567891)).toBeGreaterThan(1e-8);
  });

  it('gives identical results for any split of the input into blocks', () => {
    const n = 5000;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.002 * i * i * 1e-3 - 0.4 * Math.sin(i / 300));
    const { x, y } = signal(phase, { noiseRms: 40, quantise: true });
    x.fill(0, 2000, 2100); // a blocked beam, so alarms are part of the comparison
    y.fill(0, 2000, 2100);
    x[3000] = Number.NaN;
    const whole = run(x, y);
    fc.assert(
      fc.property(fc.uniqueArray(fc.integer({ min: 1, max: n - 1 }), { maxLength: 12 }), (cuts) => {
        const split = run(x, y, baseOptions, [...cuts].sort((a, b) => a - b));
        expect(split.out).toEqual(whole.out);
        expect(split.events).toEqual(whole.events);
      }),
      { numRuns: 40 },
    );
    expect(whole.events.length).toBeGreaterThan(0);
  });

  // The tracker keeps its state as doubles between blocks (loop velocity, lag, noise, recent step, turns, last phase,
  // travel while held, last step): each must carry over, which the cuts inside holds and fast motion below show.
  it('gives identical results for any split with both unwraps, fast motion and holds inside blocks', () => {
    const n = 3000;
    // From rest to 0.7 fringe per sample (beyond the plain rule, within the velocity-aided one) and back,
    // with blocked beams at low, middle and high speed: the travel while held crosses its limit there.
    const phase = new Float64Array(n);
    for (let i = 1; i < n; i++) phase[i] = phase[i - 1]! + 4.4 * Math.sin((Math.PI * i) / n) ** 2;
    const { x, y } = signal(phase, { noiseRms: 60, quantise: true });
    for (const at of [150, 700, 1500, 2400]) {
      x.fill(0, at, at + 40);
      y.fill(0, at, at + 40);
    }
    for (const unwrap of ['plain', 'velocity-aided'] as const) {
      const options: PipelineOptions = { ...baseOptions, unwrap };
      const whole = run(x, y, options);
      const tracker = whole.pipeline.stages.tracker;
      fc.assert(
        fc.property(fc.uniqueArray(fc.integer({ min: 1, max: n - 1 }), { minLength: 1, maxLength: 12 }), (cuts) => {
          const split = run(x, y, options, [...cuts].sort((a, b) => a - b));
          expect(split.out).toEqual(whole.out);
          expect(split.events).toEqual(whole.events);
          const after = split.pipeline.stages.tracker;
          expect([after.turns, after.phaseRad, after.stepRad]).toEqual([tracker.turns, tracker.phaseRad, tracker.stepRad]);
        }),
        { numRuns: 60 },
      );
      expect(whole.events.some((event) => event.kind === 'countLost')).toBe(true);
    }
  });

  it('reset() behaves like a new pipeline', () => {
    const phase = Float64Array.from({ length: 3000 }, (_, i) => 0.05 * i);
    const { x, y } = signal(phase, { noiseRms: 30 });
    const first = run(x, y);
    const out = outputs(3000);
    const events: AlarmEvent[] = [];
    first.pipeline.reset();
    first.pipeline.process(x, y, 3000, out, events);
    expect(out).toEqual(first.out);
    expect(events).toEqual(first.events);
  });
});

describe('displacement and velocity', () => {
  it('scales by λ_vac/(fold·n) and a change of index rescales the reading, not the count', () => {
    const n = 2000;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.1 * i);
    const { x, y } = signal(phase);
    const pipeline = createPipeline({ ...baseOptions, fold: 4, refractiveIndex: 1.00027 });
    const out = outputs(n);
    pipeline.process(x, y, n, out, []);
    const fringes = (phase[n - 1]! - phase[0]!) / (2 * Math.PI);
    expect(out.positionM[n - 1]).toBeCloseTo((fringes * HE_NE_M) / (4 * 1.00027), 15);
    pipeline.setRefractiveIndex(1);
    const more = outputs(1);
    pipeline.process(x.subarray(n - 1), y.subarray(n - 1), 1, more, []);
    expect(more.positionM[0]).toBeCloseTo((fringes * HE_NE_M) / 4, 15);
  });

  it('estimates a constant velocity exactly once the loop has settled', () => {
    const n = 20000;
    const velocityMS = 0.05; // 0.05 m/s at 1 MHz, fold 2: 0.158 fringe per sample
    const stepRad = ((velocityMS / 1e6) / metresPerFringe) * 2 * Math.PI;
    const phase = Float64Array.from({ length: n }, (_, i) => stepRad * i);
    const { x, y } = signal(phase);
    const { out } = run(x, y, { ...baseOptions, bandwidthHz: 5000 });
    expect(out.velocityMS[n - 1]).toBeCloseTo(velocityMS, 7);
  });

  it('re-references at any future sample: position zero there and the latch cleared', () => {
    const n = 4000;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.02 * i);
    const { x, y } = signal(phase);
    x[500] = Number.NaN;
    const pipeline = createPipeline(baseOptions);
    const out = outputs(n);
    const events: AlarmEvent[] = [];
    pipeline.reReference(1500);
    pipeline.process(x, y, n, out, events);
    expect(out.positionM[1500]).toBe(0);
    expect(out.positionM[n - 1]).toBeCloseTo((0.02 * (n - 1 - 1500) / (2 * Math.PI)) * metresPerFringe, 15);
    expect(events.filter((e) => e.kind === 'countLost')).toEqual([
      { sampleIndex: 500, kind: 'countLost', state: 'raised', value: Number.NaN },
      { sampleIndex: 1500, kind: 'countLost', state: 'cleared', value: Number.NaN },
    ]);
    expect(out.flags[1499]! & AlarmBit.countLost).toBe(AlarmBit.countLost);
    expect(out.flags[1500]! & AlarmBit.countLost).toBe(0);
    expect(() => pipeline.reReference(10)).toThrow(/atSampleIndex must be an integer in 4000\.\./);
  });
});

describe('alarms', () => {
  const n = 6000;
  const moving = () => Float64Array.from({ length: n }, (_, i) => 0.05 * i);
  const kinds = (events: AlarmEvent[]) => events.map((e) => `${e.kind}:${e.state}@${e.sampleIndex}`);

  it('a clean signal raises none', () => {
    const { x, y } = signal(moving(), { noiseRms: 60, quantise: true });
    const { events, out } = run(x, y);
    expect(events).toEqual([]);
    expect(out.flags.every((f) => f === 0)).toBe(true);
  });

  it('a blocked beam while moving raises low signal at once and latches count lost', () => {
    const { x, y } = signal(moving(), { noiseRms: 20 });
    for (let i = 2000; i < 2300; i++) {
      x[i] = ellipse.offsetX + 0.05 * (x[i]! - ellipse.offsetX);
      y[i] = ellipse.offsetY + 0.05 * (y[i]! - ellipse.offsetY);
    }
    const { events, out } = run(x, y);
    // Level 0.05 < 0.3: raised at the first blocked sample. Travel 0.05 rad/sample: past π/2 after 32 samples.
    expect(kinds(events)).toEqual(['lowSignal:raised@2000', 'countLost:raised@2031', 'lowSignal:cleared@2331']);
    expect(out.flags[2150]! & AlarmBit.lowSignal).toBe(AlarmBit.lowSignal);
    expect(out.flags.subarray(2031).every((f) => (f & AlarmBit.countLost) !== 0)).toBe(true);
    expect(out.flags.subarray(0, 2031).every((f) => (f & AlarmBit.countLost) === 0)).toBe(true);
  });

  it('a blocked beam at standstill raises low signal but keeps the count', () => {
    const still = new Float64Array(n).fill(0.7);
    const { x, y } = signal(still, { noiseRms: 20 });
    for (let i = 1000; i < 1400; i++) {
      x[i] = ellipse.offsetX;
      y[i] = ellipse.offsetY;
    }
    const { events } = run(x, y);
    expect(kinds(events)).toEqual(['lowSignal:raised@1000', 'lowSignal:cleared@1431']);
  });

  it('a saturation burst raises saturation at the first clipped sample and clears after the hold', () => {
    const { x, y } = signal(moving());
    for (let i = 3000; i < 3050; i++) x[i] = 32767;
    const { events } = run(x, y);
    expect(kinds(events)).toEqual(['saturation:raised@3000', 'saturation:cleared@3081']);
    expect(events[0]!.value).toBe(32767);
  });

  it('saturation follows the ADC format: offset-binary 12-bit and float with a full scale', () => {
    const x = Float64Array.from([2048, 4095, 2000, 0]);
    const y = Float64Array.from([2048, 2048, 2048, 2048]);
    const unsigned = run(x, y, { ...baseOptions, calibration: null, adc: { kind: 'unsigned', bits: 12 } });
    expect(Array.from(unsigned.out.flags, (f) => f & AlarmBit.saturation)).toEqual([0, 2, 2, 2]);
    const fx = Float64Array.from([0.5, 1.0, -1.2, 0.1]);
    const fy = Float64Array.from([0.5, 0.5, 0.5, 0.5]);
    const float = run(fx, fy, { ...baseOptions, calibration: null, adc: { kind: 'float', fullScale: 1 } });
    expect(Array.from(float.out.flags, (f) => f & AlarmBit.saturation)).toEqual([0, 2, 2, 2]);
  });

  it('non-finite samples raise bad sample and latch count lost at that sample', () => {
    const { x, y } = signal(moving());
    y[4000] = Number.POSITIVE_INFINITY;
    x[4001] = Number.NaN;
    const { events, out } = run(x, y);
    expect(kinds(events)).toEqual(['badSample:raised@4000', 'countLost:raised@4000', 'badSample:cleared@4033']);
    expect(Number.isNaN(out.level[4000])).toBe(true);
    expect(Number.isFinite(out.positionM[4000])).toBe(true); // held, and flagged
  });

  it('an overspeed burst raises overspeed; beyond the aliasing margin it latches count lost', () => {
    const burst = (stepRad: number) => {
      const phase = new Float64Array(n);
      for (let i = 1; i < n; i++) phase[i] = phase[i - 1]! + (i >= 2000 && i < 2100 ? stepRad : 0.05);
      const { x, y } = signal(phase);
      return kinds(run(x, y).events);
    };
    expect(burst(0.6 * Math.PI)).toEqual(['overspeed:raised@2000', 'overspeed:cleared@2131']);
    expect(burst(0.8 * Math.PI)).toEqual(['countLost:raised@2000', 'overspeed:raised@2000', 'overspeed:cleared@2131']);
  });

  it('an input gap raises input gap and count lost on the next sample', () => {
    const { x, y } = signal(moving());
    const pipeline = createPipeline(baseOptions);
    const out = outputs(n);
    const events: AlarmEvent[] = [];
    pipeline.process(x.subarray(0, 1000), y.subarray(0, 1000), 1000, out, events);
    pipeline.markGap(250);
    pipeline.process(x.subarray(1250), y.subarray(1250), n - 1250, out, events);
    expect(kinds(events)).toEqual(['inputGap:raised@1250', 'countLost:raised@1250', 'inputGap:cleared@1251']);
    expect(events[0]!.value).toBe(250);
    expect(out.flags[0]).toBe(AlarmBit.inputGap | AlarmBit.countLost);
    expect(out.flags[1]).toBe(AlarmBit.countLost);
    expect(pipeline.nextSampleIndex).toBe(n);
  });

  it.each(['plain', 'velocity-aided'] as const)('the step across an input gap raises no overspeed (%s unwrap)', (unwrap) => {
    // Slow motion, then 0.7π of phase unseen in a gap of 10 samples: above the overspeed step, but no speed.
    const phase = new Float64Array(4000);
    for (let i = 1; i < phase.length; i++) phase[i] = phase[i - 1]! + 0.01 + (i === 2000 ? 0.7 * Math.PI : 0);
    const { x, y } = signal(phase);
    const pipeline = createPipeline({ ...baseOptions, unwrap });
    const out = outputs(phase.length);
    const events: AlarmEvent[] = [];
    pipeline.process(x.subarray(0, 2000), y.subarray(0, 2000), 2000, out, events);
    pipeline.markGap(10);
    pipeline.process(x.subarray(2000), y.subarray(2000), 2000, out, events);
    expect(kinds(events)).toEqual(['inputGap:raised@2010', 'countLost:raised@2010', 'inputGap:cleared@2011']);
    expect(Array.from(out.flags.subarray(0, 2000)).every((f) => (f & AlarmBit.overspeed) === 0)).toBe(true);
  });

  it('reproduces the unambiguous speed limit v_max = λ·f_s/(2·fold·n) (common practice)', () => {
    const limits = createPipeline(baseOptions).speedLimits;
    expect(limits.unambiguousMS).toBeCloseTo((HE_NE_M * 1e6) / (2 * 2 * 1), 12);
    expect(limits.unambiguousMS).toBeCloseTo(0.158, 3); // docs/references.md: 0.158 m/s at 1 MHz, N = 2
    expect(limits.overspeedMS).toBeCloseTo(limits.unambiguousMS / 2, 12);
    const folded = createPipeline({ ...baseOptions, fold: 4, refractiveIndex: 1.00027 }).speedLimits;
    expect(folded.unambiguousMS).toBeCloseTo((HE_NE_M * 1e6) / (2 * 4 * 1.00027), 12);
  });
});

describe('options', () => {
  it('bad options give errors naming the option, the rule and the value', () => {
    expect(() => createPipeline({ ...baseOptions, rateHz: -5 })).toThrow('rateHz must be a positive finite number (got -5)');
    expect(() => createPipeline({ ...baseOptions, fold: 0 })).toThrow('fold must be a positive finite number (got 0)');
    expect(() => createPipeline({ ...baseOptions, wavelengthM: Number.NaN })).toThrow('wavelengthM must be a positive finite number (got NaN)');
    expect(() => createPipeline({ ...baseOptions, refractiveIndex: 0.9 })).toThrow('refractiveIndex must be a number in [1, 1.01] (got 0.9)');
    expect(() => createPipeline({ ...baseOptions, bandwidthHz: 2e5 })).toThrow('bandwidthHz must be a number in (0, 100000] (got 200000)');
    expect(() => createPipeline({ ...baseOptions, adc: { kind: 'unsigned', bits: 40 } })).toThrow('adc.bits must be an integer in 2..32 (got 40)');
    expect(() => createPipeline({ ...baseOptions, calibration: { ...ellipse, amplitudeY: -1 } })).toThrow(
      'calibration.amplitudeY must be a positive finite number (got -1)',
    );
    expect(() => createPipeline({ ...baseOptions, lowSignalLevel: 1.5 })).toThrow('lowSignalLevel must be a number in (0, 1] (got 1.5)');
  });
});

describe('front end', () => {
  it('a front end that computes what the stages compute gives identical results, and blocks with trouble fall back', () => {
    const n = 20_000;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.03 * i);
    const { x, y } = signal(phase, { noiseRms: 40, quantise: true });
    x.fill(ellipse.offsetX, 5000, 5400); // blocked beam
    y.fill(ellipse.offsetY, 5000, 5400);
    x[12_000] = 32767; // saturation
    let quietBlocks = 0;
    let calls = 0;
    const phaseRad = new Float64Array(4096);
    const frontEnd: FrontEnd = {
      process(xs, ys, length, c, low, high, minLevel, level) {
        calls++;
        for (let i = 0; i < length; i++) {
          const u = c[0]! * xs[i]! + c[1]!;
          const v = c[2]! * xs[i]! + c[3]! * ys[i]! + c[4]!;
          const lev = Math.sqrt(u * u + v * v);
          if (!(lev >= minLevel) || xs[i]! <= low || xs[i]! >= high || ys[i]! <= low || ys[i]! >= high) return null;
          level[i] = lev;
          phaseRad[i] = fastAtan2(v, u);
        }
        quietBlocks++;
        return phaseRad;
      },
    };
    const plain = run(x, y, baseOptions, [4096, 8192, 12288, 16384]);
    const accelerated = run(x, y, { ...baseOptions, frontEnd }, [4096, 8192, 12288, 16384]);
    expect(accelerated.out).toEqual(plain.out);
    expect(accelerated.events).toEqual(plain.events);
    expect(plain.events.length).toBeGreaterThan(0);
    expect(calls).toBeGreaterThan(quietBlocks); // some blocks were handed back to the stages
    expect(quietBlocks).toBeGreaterThan(0);
  });
});
