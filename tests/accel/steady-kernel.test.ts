// Checks of the steady-path kernel (src/accel/steady-kernel.ts): the tracker's steady loop, the displacement and the
// whole default pipeline against the plain JavaScript stages of src/core, to the bit (Object.is), for random blocks,
// held samples, alarms, gaps, re-references, calibration and index changes, resets and block splits.
// Reference: the plain pipeline and stages of src/core (their own checks tie them to published values);
// λ_vac = 632.9908 nm (unstabilised He-Ne).
import { afterEach, describe, expect, it, vi } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import {
  createDisplacement,
  createPhaseTracker,
  createPipeline,
  createQuadratureSynthesizer,
  createRandom,
  type AlarmEvent,
  type EllipseCalibration,
  type PipelineOptions,
  type SampleArray,
} from '../../src/core/index.js';
import { createPipeline as createDefaultPipeline, createWasmSteadyKernel, steadyKernelBytes, type WasmSteadyKernel } from '../../src/accel/index.js';

const HE_NE_M = 632.9908e-9;
const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const other: EllipseCalibration = { offsetX: 650, offsetY: -420, amplitudeX: 11900, amplitudeY: 10900, phaseErrorRad: 0.05 };
const baseOptions: PipelineOptions = { rateHz: 1e6, wavelengthM: HE_NE_M, fold: 2, calibration: ellipse, adc: { kind: 'int16' } };

function kernel(): WasmSteadyKernel {
  const made = createWasmSteadyKernel();
  if (made === null) throw new Error('WebAssembly SIMD is missing in this Node: the accel tests need it');
  return made;
}

/** Index of the first element that differs by Object.is, or −1. */
function firstDifference(a: ArrayLike<number>, b: ArrayLike<number>): number {
  if (a.length !== b.length) return Math.min(a.length, b.length);
  for (let i = 0; i < a.length; i++) if (!Object.is(a[i], b[i])) return i;
  return -1;
}

/**
 * An invented motion: slow and fast stretches (some beyond the overspeed threshold, π/2 rad per sample), stops,
 * reversals, optionally a blocked beam, saturation and (float samples) NaN and infinities.
 */
function signal(n: number, seed: number, float: boolean) {
  const random = createRandom(seed);
  const phase = new Float64Array(n);
  let p = random.uniform() * 6;
  let speed = 0;
  for (let i = 0; i < n; i++) {
    if (i % 500 === 0) {
      const pick = random.uniform();
      speed = pick < 0.1 ? 1.7 * (random.uniform() < 0.5 ? -1 : 1) : pick < 0.2 ? 0 : (random.uniform() - 0.5) * 2.6;
    }
    p += speed + 0.01 * Math.sin(i / 37);
    phase[i] = p;
  }
  const xs = new Float64Array(n);
  const ys = new Float64Array(n);
  createQuadratureSynthesizer({ ellipse, noiseRms: 25, adc: { kind: 'int16' }, seed }).process(phase, xs, ys, n);
  for (let k = 0; k < 3; k++) {
    const at = Math.floor(random.uniform() * (n - 300));
    const kind = random.uniform();
    if (kind < 0.5) {
      xs.fill(ellipse.offsetX, at, at + 1 + Math.floor(random.uniform() * 250)); // blocked beam: held samples
      ys.fill(ellipse.offsetY, at, at + 1 + Math.floor(random.uniform() * 250));
    } else if (kind < 0.75) {
      xs[at] = 32767; // saturation
    } else if (float) {
      xs[at] = random.uniform() < 0.5 ? Number.NaN : Number.POSITIVE_INFINITY;
    }
  }
  if (float) return { x: xs as SampleArray, y: ys as SampleArray };
  return { x: Int16Array.from(xs) as SampleArray, y: Int16Array.from(ys) as SampleArray };
}

type Step =
  | { kind: 'block'; length: number }
  | { kind: 'gap'; lost: number }
  | { kind: 'reReference'; ahead: number }
  | { kind: 'calibration' }
  | { kind: 'index'; value: number }
  | { kind: 'reset' };

const stepArbitrary: fc.Arbitrary<Step> = fc.oneof(
  { weight: 12, arbitrary: fc.integer({ min: 1, max: 6000 }).map((length): Step => ({ kind: 'block', length })) },
  { weight: 2, arbitrary: fc.integer({ min: 1, max: 5000 }).map((lost): Step => ({ kind: 'gap', lost })) },
  { weight: 3, arbitrary: fc.integer({ min: 0, max: 8000 }).map((ahead): Step => ({ kind: 'reReference', ahead })) },
  { weight: 1, arbitrary: fc.constant<Step>({ kind: 'calibration' }) },
  { weight: 1, arbitrary: fc.double({ min: 1, max: 1.009, noNaN: true }).map((value): Step => ({ kind: 'index', value })) },
  { weight: 1, arbitrary: fc.constant<Step>({ kind: 'reset' }) },
);

interface Outputs {
  positionM: Float64Array;
  velocityMS: Float64Array;
  level: Float32Array;
  flags: Uint8Array;
  unwrappedPhaseRad: Float64Array;
}

const plainOutputs = (total: number): Outputs => ({
  positionM: new Float64Array(total),
  velocityMS: new Float64Array(total),
  level: new Float32Array(total),
  flags: new Uint8Array(total),
  unwrappedPhaseRad: new Float64Array(total),
});

/** Runs `steps` over the signal (blocks wrap around it) and returns every output and event. */
function runSteps(create: typeof createPipeline, options: PipelineOptions, x: SampleArray, y: SampleArray, steps: readonly Step[], outputs = plainOutputs) {
  const total = steps.reduce((sum, step) => sum + (step.kind === 'block' ? step.length : 0), 0);
  const out = outputs(total);
  const pipeline = create(options);
  const events: AlarmEvent[] = [];
  let written = 0;
  let read = 0;
  for (const step of steps) {
    if (step.kind === 'gap') pipeline.markGap(step.lost);
    else if (step.kind === 'reReference') pipeline.reReference(pipeline.nextSampleIndex + step.ahead);
    else if (step.kind === 'calibration') pipeline.setCalibration(other);
    else if (step.kind === 'index') pipeline.setRefractiveIndex(step.value);
    else if (step.kind === 'reset') pipeline.reset();
    else {
      if (read + step.length > x.length) read = 0;
      const end = written + step.length;
      pipeline.process(x.subarray(read, read + step.length), y.subarray(read, read + step.length), step.length, {
        positionM: out.positionM.subarray(written, end),
        velocityMS: out.velocityMS.subarray(written, end),
        level: out.level.subarray(written, end),
        flags: out.flags.subarray(written, end),
        unwrappedPhaseRad: out.unwrappedPhaseRad.subarray(written, end),
      }, events);
      written = end;
      read += step.length;
    }
  }
  return { out, events };
}

function expectSame(actual: ReturnType<typeof runSteps>, expected: ReturnType<typeof runSteps>): void {
  for (const key of Object.keys(expected.out) as (keyof typeof expected.out)[]) {
    expect({ key, firstDifference: firstDifference(actual.out[key], expected.out[key]) }).toEqual({ key, firstDifference: -1 });
  }
  expect(actual.events).toEqual(expected.events);
}

describe('default pipeline with the steady-path kernel', () => {
  it('gives the plain pipeline\'s outputs and events to the bit for random blocks, gaps, re-references, calibration and index changes and resets', () => {
    const ints = signal(60_000, 1, false);
    const floats = signal(60_000, 2, true);
    fc.assert(
      fc.property(fc.array(stepArbitrary, { minLength: 1, maxLength: 24 }), fc.boolean(), (steps, float) => {
        const { x, y } = float ? floats : ints;
        const options: PipelineOptions = float ? { ...baseOptions, adc: { kind: 'float', fullScale: 32768 } } : baseOptions;
        expectSame(runSteps(createDefaultPipeline, options, x, y, steps), runSteps(createPipeline, options, x, y, steps));
      }),
      { numRuns: 40 },
    );
  });

  it('the same for velocity-aided unwrapping, other loop bandwidths and thresholds, and float32 samples', () => {
    const ints = signal(40_000, 3, false);
    const variants: PipelineOptions[] = [
      { ...baseOptions, unwrap: 'velocity-aided' },
      { ...baseOptions, bandwidthHz: 50_000, overspeedStepRad: 1.2, lowSignalLevel: 0.5 },
      { ...baseOptions, adc: { kind: 'float', fullScale: 32768 } },
    ];
    fc.assert(
      fc.property(fc.array(stepArbitrary, { minLength: 1, maxLength: 16 }), fc.integer({ min: 0, max: variants.length - 1 }), (steps, pick) => {
        const options = variants[pick]!;
        const x = pick === 2 ? Float32Array.from(ints.x) : ints.x;
        const y = pick === 2 ? Float32Array.from(ints.y) : ints.y;
        expectSame(runSteps(createDefaultPipeline, options, x, y, steps), runSteps(createPipeline, options, x, y, steps));
      }),
      { numRuns: 25 },
    );
  });

  it('a block with held samples between steady ones, the count unchanged across it: identical (the loop state moved)', () => {
    const n = 4000;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.3 + 0.0004 * i + 0.02 * Math.sin(i / 50)); // no fringe crossed
    const x = new Int16Array(n);
    const y = new Int16Array(n);
    createQuadratureSynthesizer({ ellipse, noiseRms: 25, adc: { kind: 'int16' }, seed: 7 }).process(phase, x, y, n);
    x.fill(ellipse.offsetX, 1250, 1260); // held in the third block
    y.fill(ellipse.offsetY, 1250, 1260);
    const steps: Step[] = Array.from({ length: 8 }, (): Step => ({ kind: 'block', length: 500 }));
    expectSame(runSteps(createDefaultPipeline, baseOptions, x, y, steps), runSteps(createPipeline, baseOptions, x, y, steps));
  });

  it('a steady run in 4096-sample blocks, as the benchmark runs it: identical, reset and run again', () => {
    const { x, y } = signal(1 << 16, 4, false);
    const steps: Step[] = [];
    for (let k = 0; k < 16; k++) steps.push({ kind: 'block', length: 4096 });
    steps.push({ kind: 'reset' });
    for (let k = 0; k < 16; k++) steps.push({ kind: 'block', length: 4096 });
    expectSame(runSteps(createDefaultPipeline, baseOptions, x, y, steps), runSteps(createPipeline, baseOptions, x, y, steps));
  });
});

/** Bytes past each output array in the shared memory, which the pipeline must leave as they are. */
const GUARD_BYTES = 64;
const GUARD = 0xab;

/**
 * Output arrays of `total` samples in a shared WebAssembly memory, after the kernel's bytes, each followed by a
 * guard; `guardsIntact` tells whether anything wrote past an array.
 */
function sharedOutputs(total: number) {
  const base = steadyKernelBytes();
  const bytesOf = [8, 8, 4, 1, 8].map((size) => Math.ceil((size * total + GUARD_BYTES) / 8) * 8);
  const pages = Math.ceil((base + bytesOf.reduce((a, b) => a + b, 0)) / 65536) + 1;
  // Room to grow: a block longer than the kernel's 4096 samples takes new bytes at the memory's end.
  const memory = new WebAssembly.Memory({ initial: pages, maximum: pages + 64, shared: true });
  const buffer = memory.buffer as unknown as SharedArrayBuffer;
  new Uint8Array(buffer, base).fill(GUARD);
  let at = base;
  const next = (index: number) => {
    const start = at;
    at += bytesOf[index]!;
    return start;
  };
  const out: Outputs = {
    positionM: new Float64Array(buffer, next(0), total),
    velocityMS: new Float64Array(buffer, next(1), total),
    level: new Float32Array(buffer, next(2), total),
    flags: new Uint8Array(buffer, next(3), total),
    unwrappedPhaseRad: new Float64Array(buffer, next(4), total),
  };
  const guardsIntact = () =>
    Object.values(out).every((array: Outputs[keyof Outputs]) => new Uint8Array(buffer, array.byteOffset + array.byteLength, GUARD_BYTES).every((byte) => byte === GUARD));
  return { memory, out, guardsIntact };
}

describe('the steady-path kernel in a shared memory (kernelMemory), writing outputs there in place', () => {
  it('gives the plain pipeline\'s outputs and events to the bit, and writes nothing past the output arrays', () => {
    const ints = signal(60_000, 8, false);
    const floats = signal(60_000, 9, true);
    fc.assert(
      fc.property(fc.array(stepArbitrary, { minLength: 1, maxLength: 16 }), fc.boolean(), (steps, float) => {
        const { x, y } = float ? floats : ints;
        const options: PipelineOptions = float ? { ...baseOptions, adc: { kind: 'float', fullScale: 32768 } } : baseOptions;
        let shared: ReturnType<typeof sharedOutputs> | null = null;
        const inMemory = (total: number) => (shared = sharedOutputs(total)).out;
        const actual = runSteps((o) => createDefaultPipeline({ ...o, kernelMemory: shared!.memory }), options, x, y, steps, inMemory);
        expectSame(actual, runSteps(createPipeline, options, x, y, steps));
        expect(shared!.guardsIntact()).toBe(true);
      }),
      { numRuns: 30 },
    );
  });

  it('steady 4096-sample blocks: no typed-array copy into the shared memory (the kernel writes level, position, velocity and phase there)', () => {
    // An invented steady motion: every block after the first takes the kernel's path.
    const n = 8 * 4096;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.02 * i + 0.3 * Math.sin(i / 300));
    const x = new Int16Array(n);
    const y = new Int16Array(n);
    createQuadratureSynthesizer({ ellipse, noiseRms: 25, adc: { kind: 'int16' }, seed: 10 }).process(phase, x, y, n);
    const steps: Step[] = Array.from({ length: 8 }, (): Step => ({ kind: 'block', length: 4096 }));
    let shared: ReturnType<typeof sharedOutputs> | null = null;
    const inMemory = (total: number) => (shared = sharedOutputs(total)).out;
    const copiesIn: string[] = [];
    const spies = [Float64Array, Float32Array].map((type) => {
      const original = type.prototype.set;
      return vi.spyOn(type.prototype, 'set').mockImplementation(function (this: Float64Array | Float32Array, ...args: Parameters<typeof original>) {
        // The kernel's own bytes (its parameters and regions) come first; the outputs after them.
        if (shared !== null && this.buffer === shared.memory.buffer && this.byteOffset >= steadyKernelBytes()) copiesIn.push(type.name);
        return original.apply(this, args as never);
      });
    });
    try {
      const actual = runSteps((o) => createDefaultPipeline({ ...o, kernelMemory: shared!.memory }), baseOptions, x, y, steps, inMemory);
      expectSame(actual, runSteps(createPipeline, baseOptions, x, y, steps));
    } finally {
      for (const spy of spies) spy.mockRestore();
    }
    expect(copiesIn).toEqual([]);
  });
});

describe('the kernel as the stages\' loops', () => {
  it('tracker: the steady loop gives the JavaScript loop\'s turns, steps, flags and events for random phase blocks', () => {
    fc.assert(
      fc.property(
        fc.array(
          fc.record({
            length: fc.integer({ min: 1, max: 3000 }),
            speed: fc.double({ min: -1.8, max: 1.8, noNaN: true }),
            heldAt: fc.option(fc.integer({ min: 0, max: 2999 })),
            gap: fc.option(fc.integer({ min: 1, max: 100 })),
          }),
          { minLength: 1, maxLength: 12 },
        ),
        (blocks) => {
          const plain = createPhaseTracker({ rateHz: 1e6 });
          const fast = createPhaseTracker({ rateHz: 1e6, kernel: kernel() });
          let phase = 0.1;
          let index = 0;
          for (const { length, speed, heldAt, gap } of blocks) {
            if (gap !== null) {
              plain.markGap(gap);
              fast.markGap(gap);
            }
            const phases = new Float64Array(length);
            const level = new Float32Array(length).fill(1);
            for (let i = 0; i < length; i++) {
              phase += speed + 0.3 * Math.sin(i * 0.7);
              phases[i] = Math.atan2(Math.sin(phase), Math.cos(phase));
            }
            if (heldAt !== null && heldAt < length) level[heldAt] = 0.1;
            const outputs = [plain, fast].map((tracker) => {
              const output = { turns: new Float64Array(length), phaseRad: phases.slice(), stepRad: new Float64Array(length), flags: new Uint8Array(length) };
              const events: AlarmEvent[] = [];
              tracker.processPhase(level, length, index, output, events);
              return { output, events };
            });
            const [a, b] = outputs as [(typeof outputs)[0], (typeof outputs)[0]];
            for (const key of ['turns', 'phaseRad', 'stepRad', 'flags'] as const) expect(firstDifference(b.output[key], a.output[key])).toBe(-1);
            expect(b.events).toEqual(a.events);
            index += length;
          }
          expect([fast.turns, fast.phaseRad, fast.stepRad, fast.countLost]).toEqual([plain.turns, plain.phaseRad, plain.stepRad, plain.countLost]);
        },
      ),
      { numRuns: 60 },
    );
  });

  it('displacement: the same positions, velocities and unwrapped phases for random turns, phases and steps, references and indices', () => {
    fc.assert(
      fc.property(
        fc.array(fc.record({ length: fc.integer({ min: 1, max: 2000 }), reference: fc.boolean(), index: fc.option(fc.double({ min: 1, max: 1.009, noNaN: true })), unwrapped: fc.boolean() }), { minLength: 1, maxLength: 8 }),
        fc.nat(),
        (blocks, seed) => {
          const random = createRandom(seed);
          const options = { wavelengthM: HE_NE_M, fold: 4, rateHz: 2e6, lengthScale: 0.99999 };
          const plain = createDisplacement(options);
          const fast = createDisplacement({ ...options, kernel: kernel() });
          for (const { length, reference, index, unwrapped } of blocks) {
            if (reference) {
              plain.referenceAtNext();
              fast.referenceAtNext();
            }
            if (index !== null) {
              plain.setRefractiveIndex(index);
              fast.setRefractiveIndex(index);
            }
            const turns = Float64Array.from({ length }, () => Math.round((random.uniform() - 0.5) * 2 ** 40));
            const phase = Float64Array.from({ length }, () => (random.uniform() - 0.5) * 2 * Math.PI);
            const step = Float64Array.from({ length }, () => (random.uniform() - 0.5) * 3);
            const a = { position: new Float64Array(length), velocity: new Float64Array(length), phase: new Float64Array(length) };
            const b = { position: new Float64Array(length), velocity: new Float64Array(length), phase: new Float64Array(length) };
            plain.process(turns, phase, step, length, a.position, a.velocity, unwrapped ? a.phase : undefined);
            fast.process(turns, phase, step, length, b.position, b.velocity, unwrapped ? b.phase : undefined);
            expect(firstDifference(b.position, a.position)).toBe(-1);
            expect(firstDifference(b.velocity, a.velocity)).toBe(-1);
            expect(firstDifference(b.phase, a.phase)).toBe(-1);
            // 2π·turns + phase, as pipeline.ts defines the unwrapped phase (zeros where not asked for).
            if (unwrapped) expect(a.phase[length - 1]).toBe(2 * Math.PI * turns[length - 1]! + phase[length - 1]!);
          }
        },
      ),
      { numRuns: 40 },
    );
  });
});

describe('without WebAssembly', () => {
  afterEach(() => {
    vi.unstubAllGlobals();
  });

  it('createWasmSteadyKernel returns null, and the default pipeline keeps the stages\' results', () => {
    vi.stubGlobal('WebAssembly', undefined);
    expect(createWasmSteadyKernel()).toBeNull();
    const { x, y } = signal(10_000, 5, false);
    const steps: Step[] = [{ kind: 'block', length: 4096 }, { kind: 'block', length: 5904 }];
    expectSame(runSteps(createDefaultPipeline, baseOptions, x, y, steps), runSteps(createPipeline, baseOptions, x, y, steps));
  });
});
