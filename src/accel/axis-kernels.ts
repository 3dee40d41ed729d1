// The axis builder's per-block work besides the pipelines (src/stream/axes.ts): splitting a block of interleaved
// frames into each axis' detector outputs, and each axis' block summary (min and max of positions and
// velocities, least level, flags seen). In JavaScript these loops cost about half of what the pipeline itself
// costs per sample; the WebAssembly SIMD kernels (axis-kernels.wat) give the same results to the bit at a
// tenth. The pipelines read their samples from, and write their outputs into, the kernels' memory, so nothing is
// copied between them.
import { integerInRange } from '../core/options.js';
import { AXIS_KERNELS_WASM_BASE64 } from './axis-kernels-wasm.js';
import { AXIS_KERNELS_SHARED_WASM_BASE64 } from './axis-kernels-shared-wasm.js';
import { instantiate } from './wasm.js';

/** One axis' block buffers, `capacity` samples each. */
export interface AxisRegion {
  /** The axis' detector outputs split out of the frames: x and y for a pair, or 3–4 outputs. */
  readonly inputs: readonly Int16Array[];
  /** Where the axis' pipeline writes its outputs. */
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  readonly flags: Uint8Array;
}

/** A block's extremes, as a loop `if (x < min) min = x` from Infinity (and so on) finds them; NaN when none is finite. */
export interface BlockExtremes {
  positionMinM: number;
  positionMaxM: number;
  velocityMinMS: number;
  velocityMaxMS: number;
  levelMin: number;
  /** All flags of the block OR-ed. */
  flagsSeen: number;
}

export interface AxisKernels {
  /** `wasm-simd`, or `js` where WebAssembly SIMD is missing (same results). */
  readonly kind: 'wasm-simd' | 'js';
  /** Samples per axis the regions hold. */
  readonly capacity: number;
  /** One region per axis. Replaced by new arrays when the capacity grows: take them after `reserve` and `load`. */
  readonly regions: readonly AxisRegion[];
  /** Room for `length` samples per axis (and frames of up to 16 channels). */
  reserve(length: number): void;
  /**
   * Takes `frames` interleaved frames of `channelCount` int16 channels (`samples[f·channelCount + c]`) for
   * `split`; the samples are read before `load` returns or by the next `split` calls, never kept beyond them.
   */
  load(samples: Int16Array, frames: number, channelCount: number): void;
  /** Channels `firstChannel` onwards of the loaded frames (as many as the axis has outputs) into axis `axis`' inputs. */
  split(axis: number, firstChannel: number): void;
  /** The extremes of axis `axis`' first `length` outputs. */
  summarise(axis: number, length: number, into: BlockExtremes): void;
}

interface KernelExports {
  readonly memory: WebAssembly.Memory;
  split_pair(src: number, n: number, xp: number, yp: number): void;
  split(src: number, strideBytes: number, n: number, dst: number): void;
  summary(pp: number, vp: number, lp: number, fp: number, n: number, out: number): void;
}

const MAX_CHANNELS = 16;

/**
 * The kernels for axes of `outputsPerAxis[k]` detector outputs each (2, 3 or 4), with room for `capacity`
 * samples per axis (0..2^26; grows with the blocks): WebAssembly SIMD where it exists, else JavaScript.
 */
export function createAxisKernels(outputsPerAxis: readonly number[], capacity: number): AxisKernels {
  outputsPerAxis.forEach((outputs, k) => integerInRange(`outputsPerAxis[${k}]`, outputs, 2, 4));
  integerInRange('capacity', capacity, 0, 2 ** 26);
  return createWasmAxisKernels(outputsPerAxis, capacity) ?? createJsAxisKernels(outputsPerAxis, capacity);
}

/** The JavaScript kernels: the reference the WebAssembly ones are tested against, and their fallback. */
export function createJsAxisKernels(outputsPerAxis: readonly number[], initialCapacity: number): AxisKernels {
  let capacity = 0;
  let regions: AxisRegion[] = [];
  let frames: Int16Array = new Int16Array(0);
  let stride = 0;
  let loaded = 0;
  const kernels: AxisKernels = {
    kind: 'js',
    get capacity() {
      return capacity;
    },
    get regions() {
      return regions;
    },
    reserve(length) {
      if (length <= capacity) return;
      capacity = length;
      regions = outputsPerAxis.map((outputs) => ({
        inputs: Array.from({ length: outputs }, () => new Int16Array(length)),
        positionM: new Float64Array(length),
        velocityMS: new Float64Array(length),
        level: new Float32Array(length),
        flags: new Uint8Array(length),
      }));
    },
    load(samples, frameCount, channelCount) {
      kernels.reserve(frameCount);
      frames = samples;
      stride = channelCount;
      loaded = frameCount;
    },
    split(axis, firstChannel) {
      const inputs = regions[axis]!.inputs;
      const n = loaded;
      // Locals keep the loop in registers (see DEVELOPERS.md).
      const samples = frames;
      const step = stride;
      for (let c = 0; c < inputs.length; c++) {
        const input = inputs[c]!;
        for (let s = 0, from = firstChannel + c; s < n; s++, from += step) input[s] = samples[from]!;
      }
    },
    summarise(axis, length, into) {
      const { positionM, velocityMS, level, flags } = regions[axis]!;
      let pMin = Infinity, pMax = -Infinity, vMin = Infinity, vMax = -Infinity, lMin = Infinity, seen = 0;
      for (let i = 0; i < length; i++) {
        const p = positionM[i]!, v = velocityMS[i]!, l = level[i]!;
        if (p < pMin) pMin = p;
        if (p > pMax) pMax = p;
        if (v < vMin) vMin = v;
        if (v > vMax) vMax = v;
        if (l < lMin) lMin = l;
        seen |= flags[i]!;
      }
      into.positionMinM = finiteOrNaN(pMin);
      into.positionMaxM = finiteOrNaN(pMax);
      into.velocityMinMS = finiteOrNaN(vMin);
      into.velocityMaxMS = finiteOrNaN(vMax);
      into.levelMin = finiteOrNaN(lMin);
      into.flagsSeen = seen;
    },
  };
  kernels.reserve(Math.max(1, initialCapacity)); // regions exist before the first block
  return kernels;
}

function finiteOrNaN(value: number): number {
  return Number.isFinite(value) ? value : Number.NaN;
}

/** The WebAssembly SIMD kernels, or null without WebAssembly SIMD. */
export function createWasmAxisKernels(outputsPerAxis: readonly number[], initialCapacity: number): AxisKernels | null {
  const instance = instantiate<KernelExports>(AXIS_KERNELS_WASM_BASE64);
  if (instance === null) return null;
  const kernel: KernelExports = instance;
  let capacity = 0;
  let regions: AxisRegion[] = [];
  // Memory layout, every region 16-byte aligned and a multiple of 16 samples long (the kernels' padding): the
  // summary's lanes (192 bytes), the frames (up to 16 channels), then each axis' inputs and outputs.
  const LANES = 0;
  const FRAMES = 192;
  let frames = new Int16Array(0);
  let lanes = new Float64Array(0);
  let lanesF32 = new Float32Array(0);
  let lanesU8 = new Uint8Array(0);
  let stride = 0;
  let loaded = 0;
  const offsets: { inputs: number[]; positionM: number; velocityMS: number; level: number; flags: number }[] = [];

  const kernels: AxisKernels = {
    kind: 'wasm-simd',
    get capacity() {
      return capacity;
    },
    get regions() {
      return regions;
    },
    reserve(length) {
      if (length <= capacity) return;
      capacity = Math.ceil(length / 16) * 16;
      let at = FRAMES + 2 * MAX_CHANNELS * capacity;
      offsets.length = 0;
      for (const outputs of outputsPerAxis) {
        const inputs = Array.from({ length: outputs }, (_, c) => at + 2 * c * capacity);
        at += 2 * outputs * capacity;
        offsets.push({ inputs, positionM: at, velocityMS: at + 8 * capacity, level: at + 16 * capacity, flags: at + 20 * capacity });
        at += 21 * capacity;
      }
      const pages = Math.ceil(at / 65536) - kernel.memory.buffer.byteLength / 65536;
      if (pages > 0) kernel.memory.grow(pages);
      const buffer = kernel.memory.buffer;
      lanes = new Float64Array(buffer, LANES, 24);
      lanesF32 = new Float32Array(buffer, LANES + 128, 8);
      lanesU8 = new Uint8Array(buffer, LANES + 160, 16);
      frames = new Int16Array(buffer, FRAMES, MAX_CHANNELS * capacity);
      regions = offsets.map((o) => ({
        inputs: o.inputs.map((offset) => new Int16Array(buffer, offset, capacity)),
        positionM: new Float64Array(buffer, o.positionM, capacity),
        velocityMS: new Float64Array(buffer, o.velocityMS, capacity),
        level: new Float32Array(buffer, o.level, capacity),
        flags: new Uint8Array(buffer, o.flags, capacity),
      }));
    },
    load(samples, frameCount, channelCount) {
      kernels.reserve(frameCount);
      const used = frameCount * channelCount;
      // Typed-array set is a memcpy; a caller's array longer than the frames region is cut to the block.
      frames.set(samples.length <= frames.length ? samples : samples.subarray(0, used));
      stride = channelCount;
      loaded = frameCount;
    },
    split(axis, firstChannel) {
      const o = offsets[axis]!;
      const src = FRAMES + 2 * firstChannel;
      if (stride === 2) kernel.split_pair(src, loaded, o.inputs[0]!, o.inputs[1]!);
      else for (let c = 0; c < o.inputs.length; c++) kernel.split(src + 2 * c, 2 * stride, loaded, o.inputs[c]!);
    },
    summarise(axis, length, into) {
      const o = offsets[axis]!;
      const region = regions[axis]!;
      kernel.summary(o.positionM, o.velocityMS, o.level, o.flags, length, LANES);
      fromLanes(lanes, lanesF32, lanesU8, region, length, into);
    },
  };
  kernels.reserve(Math.max(1, initialCapacity)); // regions exist before the first block
  return kernels;
}

/** The summary's lanes (see axis-kernels.wat) as the block's extremes. */
function fromLanes(
  lanes: Float64Array, lanesF32: Float32Array, lanesU8: Uint8Array,
  outputs: { readonly positionM: Float64Array; readonly velocityMS: Float64Array; readonly level: Float32Array }, length: number, into: BlockExtremes,
): void {
  into.positionMinM = finiteOrNaN(firstOfEqual(least(lanes, 0, 4), outputs.positionM, length));
  into.positionMaxM = finiteOrNaN(firstOfEqual(greatest(lanes, 4), outputs.positionM, length));
  into.velocityMinMS = finiteOrNaN(firstOfEqual(least(lanes, 8, 4), outputs.velocityMS, length));
  into.velocityMaxMS = finiteOrNaN(firstOfEqual(greatest(lanes, 12), outputs.velocityMS, length));
  into.levelMin = finiteOrNaN(firstOfEqual(least(lanesF32, 0, 8), outputs.level, length));
  let seen = 0;
  for (let i = 0; i < 16; i++) seen |= lanesU8[i]!;
  into.flagsSeen = seen;
}

/** A pipeline's outputs of one block, for the block summary. */
export interface BlockOutputs {
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  readonly flags: Uint8Array;
}

/** `summarise` over outputs that lie in a shared memory, where they are, without copies. */
export interface SharedBlockSummary {
  /** Whether all four arrays lie in the shared memory, so that `summarise` may take them. */
  holds(outputs: BlockOutputs): boolean;
  /**
   * The extremes of the first `length` samples, the same as `AxisKernels.summarise` gives. The kernel first pads
   * each array up to a multiple of 16 samples (NaN, 0): the arrays must have room for that, and nothing may read
   * those padding samples meanwhile.
   */
  summarise(outputs: BlockOutputs, length: number, into: BlockExtremes): void;
}

/**
 * The block summary over a shared WebAssembly memory (e.g. a ring that two threads share): `lanesAt`, a 16-byte
 * aligned area of 176 bytes in it that nothing else writes, takes the kernel's lanes. Null without WebAssembly
 * SIMD or shared memory (then copy the outputs into `AxisKernels` regions).
 */
export function createSharedBlockSummary(memory: WebAssembly.Memory, lanesAt: number): SharedBlockSummary | null {
  const kernel = instantiate<KernelExports>(AXIS_KERNELS_SHARED_WASM_BASE64, { env: { memory } });
  if (kernel === null) return null;
  const buffer = memory.buffer;
  const lanes = new Float64Array(buffer, lanesAt, 24);
  const lanesF32 = new Float32Array(buffer, lanesAt + 128, 8);
  const lanesU8 = new Uint8Array(buffer, lanesAt + 160, 16);
  return {
    holds: (o) => o.positionM.buffer === buffer && o.velocityMS.buffer === buffer && o.level.buffer === buffer && o.flags.buffer === buffer,
    summarise(o, length, into) {
      kernel.summary(o.positionM.byteOffset, o.velocityMS.byteOffset, o.level.byteOffset, o.flags.byteOffset, length, lanesAt);
      fromLanes(lanes, lanesF32, lanesU8, o, length, into);
    },
  };
}

/** The lanes' minimum in the loop's own rule (a lane that saw only NaN holds Infinity). */
function least(lanes: Float64Array | Float32Array, from: number, count: number): number {
  let m = Infinity;
  for (let i = from; i < from + count; i++) if (lanes[i]! < m) m = lanes[i]!;
  return m;
}

function greatest(lanes: Float64Array, from: number): number {
  let m = -Infinity;
  for (let i = from; i < from + 4; i++) if (lanes[i]! > m) m = lanes[i]!;
  return m;
}

/**
 * Values equal under `<` are the same bits except 0 and −0, where the loop keeps the first it meets and the lanes
 * may have kept another: for a zero, the block's first zero.
 */
function firstOfEqual(value: number, values: Float64Array | Float32Array, length: number): number {
  if (value !== 0) return value;
  for (let i = 0; i < length; i++) if (values[i] === 0) return values[i]!;
  return value;
}
