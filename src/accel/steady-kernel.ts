// The pipeline's steady path in one WebAssembly pass (steady-kernel.wat): the exact front end, the tracker's steady
// loop and the displacement, each to the bit what the JavaScript stages give. One object serves the pipeline as
// its `frontEnd` and as its `kernel`: the front end's pass also runs the tracker and the displacement from the
// state the previous block ended in, and when the tracker and the displacement then ask for their loops with
// exactly that state (as they do on every steady block after the first), their results are copied out instead of
// computed again. Any other call computes them from its own arguments, so the results never depend on that guess.
import type { FrontEnd, SampleArray, SteadyKernel } from '../core/index.js';
import { createRecentViews } from '../core/recent-views.js';
import { createFusedFrontEnd } from './fused-front-end.js';
import { STEADY_KERNEL_SHARED_WASM_BASE64 } from './steady-kernel-shared-wasm.js';
import { STEADY_KERNEL_WASM_BASE64 } from './steady-kernel-wasm.js';
import { instantiate } from './wasm.js';

export interface WasmSteadyKernel extends FrontEnd, SteadyKernel {}

/** Views of the kernel's regions, one block long. */
interface BlockViews {
  readonly level: Float32Array;
  readonly turns: Float64Array;
  readonly step: Float64Array;
  readonly position: Float64Array;
  readonly velocity: Float64Array;
  readonly unwrapped: Float64Array;
}

export interface WasmSteadyKernelOptions {
  /** Samples per block to reserve memory for at once; it grows to the largest block seen. Default 4096. */
  readonly capacity?: number;
  /**
   * A shared WebAssembly memory to run in, whose first `steadyKernelBytes(capacity)` bytes the kernel takes for
   * itself (a larger block grows the memory and takes bytes at its end). The pipeline's level, position, velocity
   * and unwrapped-phase arrays that lie in the rest of it are then written in place, not copied: a ring of blocks
   * shared with another thread (tools/capture-analysis-thread.ts), where a typed-array copy goes element by element.
   * Without it the kernel has a memory of its own.
   */
  readonly memory?: WebAssembly.Memory;
}

interface KernelExports {
  fused(n: number, wide: number, xp: number, yp: number, lp: number, pp: number, tp: number, sp: number, posp: number, velp: number): number;
  track(n: number, lp: number, pp: number, tp: number, sp: number): number;
  place(n: number, tp: number, pp: number, sp: number, posp: number, velp: number): void;
  unwrap(n: number, tp: number, pp: number, up: number): void;
}

// Indices of the parameter area (f64) at the start of the module's memory; steady-kernel.wat lists them.
const MIN_LEVEL = 7;
const LAST = 8;
const TURNS = 9;
const LOOP = 10; // w, lag, noise, recent step
const ALPHA = 14;
const BETA = 15;
const MAX_STEP = 16;
const REFERENCE = 17; // reference turns and phase, metres per fringe, per rad, velocity per step
const AFTER = 24; // last phase, turns, w, lag, noise, recent step after the block
const REGIONS_AT = 1024;
/** Bytes a region takes past its samples, so that the regions' equal indices never lie 4 KiB apart (see reserve). */
const REGION_SPACING = 448;
const REGION_COUNT = 9;

/** Bytes at the start of a shared memory a kernel of this capacity takes (WasmSteadyKernelOptions.memory), a multiple of 64. */
export function steadyKernelBytes(capacity = 4096): number {
  return Math.ceil((REGIONS_AT + REGION_COUNT * (8 * (Math.ceil(capacity / 8) * 8) + REGION_SPACING)) / 64) * 64;
}

/**
 * The steady-path kernel, or null when this engine lacks WebAssembly or its SIMD extension. Int16Array and
 * Float64Array blocks run in WebAssembly; other sample types take the fused JavaScript front end, and their
 * tracker and displacement loops still run here.
 */
export function createWasmSteadyKernel(options: WasmSteadyKernelOptions = {}): WasmSteadyKernel | null {
  const shared = options.memory;
  const instance =
    shared === undefined
      ? instantiate<KernelExports & { readonly memory: WebAssembly.Memory }>(STEADY_KERNEL_WASM_BASE64)
      : instantiate<KernelExports & { readonly memory?: undefined }>(STEADY_KERNEL_SHARED_WASM_BASE64, { env: { memory: shared } });
  if (instance === null) return null;
  const kernel: KernelExports = instance;
  const memory = shared ?? instance.memory!;
  // The caller's arrays in this buffer are written in place (the buffer object of a shared memory stays the same
  // until it grows; arrays made before a growth keep the one they were made on).
  const home = shared?.buffer ?? null;
  const inPlace = (array: Float32Array | Float64Array, length: number, step: number) =>
    home !== null && length % step === 0 && array.length >= length && (array.buffer === home || array.buffer === memory.buffer);
  const fallback = createFusedFrontEnd();
  let params = new Float64Array(memory.buffer, 0, 32);
  // What the next block's pass assumes the tracker and the displacement start from (indices as in `params`):
  // the state the last tracked block ended in and the last reference and scale.
  const assumed = new Float64Array(22);

  let capacity = 0;
  // Regions, in this order: x, y (int16 or f64), level (f32), phase, turns, step, position, velocity, unwrapped
  // phase (f64). Each is 448 bytes longer than its samples need (nine multiples of 448 are distinct modulo 4096), so
  // that in 4096-sample blocks equal indices of two regions never lie a multiple of 4 KiB apart (the CPU then takes
  // a load for a store to the same address and waits: twice as slow).
  const at = new Int32Array(REGION_COUNT);
  let xs = new Int16Array(0);
  let ys = xs;
  let xsWide = new Float64Array(0);
  let ysWide = xsWide;
  let levels = new Float32Array(0);
  let phases = xsWide;
  let turnsAll = xsWide;
  let stepsAll = xsWide;
  let positions = xsWide;
  let velocities = xsWide;
  let unwrappedAll = xsWide;
  // Views of exactly a block's length, for the copies out.
  const views = createRecentViews(
    (length): BlockViews => ({
      level: levels.subarray(0, length),
      turns: turnsAll.subarray(0, length),
      step: stepsAll.subarray(0, length),
      position: positions.subarray(0, length),
      velocity: velocities.subarray(0, length),
      unwrapped: unwrappedAll.subarray(0, length),
    }),
  );

  function reserve(samples: number): void {
    const first = capacity === 0;
    capacity = Math.ceil(samples / 8) * 8;
    const region = 8 * capacity + REGION_SPACING;
    // In a shared memory the bytes after the kernel's are the caller's: a capacity beyond the first takes new ones
    // at the memory's end.
    const regionsAt = shared === undefined || first ? REGIONS_AT : memory.buffer.byteLength;
    const pages = Math.ceil((regionsAt + REGION_COUNT * region) / 65536) - memory.buffer.byteLength / 65536;
    if (pages > 0) memory.grow(pages);
    const buffer = memory.buffer;
    for (let k = 0; k < REGION_COUNT; k++) at[k] = regionsAt + k * region;
    params = new Float64Array(buffer, 0, 32);
    xs = new Int16Array(buffer, at[0]!, capacity);
    ys = new Int16Array(buffer, at[1]!, capacity);
    xsWide = new Float64Array(buffer, at[0]!, capacity);
    ysWide = new Float64Array(buffer, at[1]!, capacity);
    levels = new Float32Array(buffer, at[2]!, capacity);
    phases = new Float64Array(buffer, at[3]!, capacity);
    turnsAll = new Float64Array(buffer, at[4]!, capacity);
    stepsAll = new Float64Array(buffer, at[5]!, capacity);
    positions = new Float64Array(buffer, at[6]!, capacity);
    velocities = new Float64Array(buffer, at[7]!, capacity);
    unwrappedAll = new Float64Array(buffer, at[8]!, capacity);
    views.clear();
  }
  reserve(options.capacity ?? 4096);

  // The last front-end pass: its block, and whether what it ran of the tracker and the displacement may be used.
  let passLength = -1;
  let passLevel: Float32Array | null = null;
  let passTracked = false; // every step of the block within the max step, from the assumed state
  let passFresh = false; // no tracker loop asked for since the pass
  let passPlaced = false; // the pass wrote position and velocity too
  // The last tracker loop: its outputs (also in the turns and step regions) for the displacement after it.
  let trackedTurns: Float64Array | null = null;
  let trackedSteps: Float64Array | null = null;
  let trackedPhases: Float64Array | null = null;
  let trackedLength = -1;
  let trackedFromPass = false; // position and velocity of the pass hold too

  // Typed-array set is a memcpy. Values past the block are copied along when they fit (the kernel reads only the
  // block and its padding); a view is made only for a caller's array longer than the reserved memory.
  function copyIn(to: Int16Array | Float32Array | Float64Array, from: SampleArray, length: number): void {
    to.set(from.length <= capacity ? from : from.subarray(0, length));
  }

  function copyPadded(to: Int16Array | Float64Array, from: SampleArray, length: number, padded: number): void {
    copyIn(to, from, length);
    if (padded > length) to.fill(from[length - 1]!, length, padded);
  }

  function process(
    x: SampleArray, y: SampleArray, length: number, c: Float64Array, low: number, high: number, minLevel: number,
    level: Float32Array, lastPhaseRad: number, stepGuardRad: number,
  ): Float64Array | null {
    passFresh = false;
    trackedTurns = null;
    if (length <= 0) return null;
    const wide = x instanceof Float64Array && y instanceof Float64Array;
    if (!wide && !(x instanceof Int16Array && y instanceof Int16Array)) {
      return fallback.process(x, y, length, c, low, high, minLevel, level, lastPhaseRad, stepGuardRad);
    }
    if (length > capacity) reserve(length);
    // Padded to the pass's group of 4 with the last sample: same checks; the tracker stops at `length`.
    const padded = Math.ceil(length / 4) * 4;
    if (wide) {
      copyPadded(xsWide, x, length, padded);
      copyPadded(ysWide, y, length, padded);
    } else {
      copyPadded(xs, x, length, padded);
      copyPadded(ys, y, length, padded);
    }
    const p = params;
    p.set(assumed);
    p[0] = c[0]!;
    p[1] = c[1]!;
    p[2] = c[2]!;
    p[3] = c[3]!;
    p[4] = c[4]!;
    p[5] = low;
    p[6] = high;
    p[MIN_LEVEL] = minLevel;
    p[LAST] = lastPhaseRad;
    // A level array in the shared memory takes the pass's levels in place (the pass writes `padded` of them); its
    // block's position and velocity then most likely lie there too, and `place` writes them in place: the pass
    // leaves them out (posp 0).
    const direct = inPlace(level, length, 4);
    const result = kernel.fused(length, wide ? 1 : 0, at[0]!, at[1]!, direct ? level.byteOffset : at[2]!, at[3]!, at[4]!, at[5]!, direct ? 0 : at[6]!, at[7]!);
    if ((result & 1) === 0) return null;
    passLength = length;
    passLevel = level;
    passTracked = (result & 2) !== 0;
    passPlaced = !direct;
    passFresh = true;
    if (!direct) level.set(views.get(length).level);
    return phases;
  }

  function track(
    phaseRad: Float64Array, level: Float32Array, length: number, minLevel: number, maxStepRad: number, lastPhase: number,
    turns: number, turnsOut: Float64Array, stepOut: Float64Array, alpha: number, beta: number, loop: Float64Array,
  ): boolean {
    const fromPass = passFresh;
    passFresh = false;
    trackedTurns = null;
    if (length <= 0) return true;
    let p = params;
    // The pass's tracker results hold when its block and every input of the loop are the ones it assumed.
    const same =
      fromPass && phaseRad === phases && level === passLevel && length === passLength &&
      Object.is(minLevel, p[MIN_LEVEL]) && Object.is(maxStepRad, p[MAX_STEP]) && Object.is(lastPhase, p[LAST]) &&
      Object.is(turns, p[TURNS]) && Object.is(loop[0], p[LOOP]) && Object.is(loop[1], p[LOOP + 1]) &&
      Object.is(loop[2], p[LOOP + 2]) && Object.is(loop[3], p[LOOP + 3]) && Object.is(alpha, p[ALPHA]) && Object.is(beta, p[BETA]);
    let steady: boolean;
    if (same) {
      steady = passTracked;
    } else {
      if (length > capacity) reserve(length);
      p = params;
      if (phaseRad !== phases) copyIn(phases, phaseRad, length);
      copyIn(levels, level, length);
      p[MIN_LEVEL] = minLevel;
      p[LAST] = lastPhase;
      p[TURNS] = turns;
      p[LOOP] = loop[0]!;
      p[LOOP + 1] = loop[1]!;
      p[LOOP + 2] = loop[2]!;
      p[LOOP + 3] = loop[3]!;
      p[ALPHA] = alpha;
      p[BETA] = beta;
      p[MAX_STEP] = maxStepRad;
      steady = kernel.track(length, at[2]!, at[3]!, at[4]!, at[5]!) === 1;
    }
    if (!steady) return false;
    const view = views.get(length);
    turnsOut.set(view.turns);
    stepOut.set(view.step);
    loop[0] = p[AFTER + 2]!;
    loop[1] = p[AFTER + 3]!;
    loop[2] = p[AFTER + 4]!;
    loop[3] = p[AFTER + 5]!;
    // The next block's pass starts from here.
    assumed[TURNS] = p[AFTER + 1]!;
    for (let k = 0; k < 4; k++) assumed[LOOP + k] = loop[k]!;
    assumed[ALPHA] = alpha;
    assumed[BETA] = beta;
    assumed[MAX_STEP] = maxStepRad;
    trackedTurns = turnsOut;
    trackedSteps = stepOut;
    trackedPhases = phaseRad;
    trackedLength = length;
    trackedFromPass = same && passPlaced;
    return true;
  }

  function place(
    turns: Float64Array, phaseRad: Float64Array, stepRad: Float64Array, length: number, positionM: Float64Array, velocityMS: Float64Array,
    refTurns: number, refPhase: number, perFringe: number, perRad: number, perStep: number, unwrappedPhaseRad?: Float64Array,
  ): void {
    const tracked = trackedTurns === turns && trackedSteps === stepRad && trackedPhases === phaseRad && trackedLength === length;
    const fromPass = tracked && trackedFromPass;
    trackedTurns = null;
    passFresh = false;
    if (length <= 0) return;
    if (length > capacity) reserve(length);
    const p = params;
    const same =
      fromPass && Object.is(refTurns, p[REFERENCE]) && Object.is(refPhase, p[REFERENCE + 1]) &&
      Object.is(perFringe, p[REFERENCE + 2]) && Object.is(perRad, p[REFERENCE + 3]) && Object.is(perStep, p[REFERENCE + 4]);
    // Arrays in the shared memory are written in place (the kernel writes an even count of samples).
    const direct = inPlace(positionM, length, 2) && inPlace(velocityMS, length, 2);
    if (!same || direct) {
      // The tracker's outputs are in the regions already when it ran here just before on these arrays.
      if (!tracked) {
        copyIn(turnsAll, turns, length);
        copyIn(stepsAll, stepRad, length);
        if (phaseRad !== phases) copyIn(phases, phaseRad, length);
      }
      p[REFERENCE] = refTurns;
      p[REFERENCE + 1] = refPhase;
      p[REFERENCE + 2] = perFringe;
      p[REFERENCE + 3] = perRad;
      p[REFERENCE + 4] = perStep;
      kernel.place(length, at[4]!, at[3]!, at[5]!, direct ? positionM.byteOffset : at[6]!, direct ? velocityMS.byteOffset : at[7]!);
    }
    const view = views.get(length);
    if (!direct) {
      positionM.set(view.position);
      velocityMS.set(view.velocity);
    }
    if (unwrappedPhaseRad) {
      // The turns and phase regions hold this block's now, whichever way it came.
      const unwrappedInPlace = inPlace(unwrappedPhaseRad, length, 2);
      kernel.unwrap(length, at[4]!, at[3]!, unwrappedInPlace ? unwrappedPhaseRad.byteOffset : at[8]!);
      if (!unwrappedInPlace) unwrappedPhaseRad.set(view.unwrapped);
    }
    assumed[REFERENCE] = refTurns;
    assumed[REFERENCE + 1] = refPhase;
    assumed[REFERENCE + 2] = perFringe;
    assumed[REFERENCE + 3] = perRad;
    assumed[REFERENCE + 4] = perStep;
  }

  return { process, track, place };
}
