// The capture analyses' per-sample work in WebAssembly SIMD (analysis-kernels.wat), to the bit of the core's loops,
// for the tools to hand to the core's analyses (tools/capture-analyses.ts); null where WebAssembly SIMD is missing,
// and the core's own loops then run.

import { MODEL_WATCH_CHUNK_SAMPLES, type ModelWatchChunkSums } from '../core/fit/model-watch.js';
import type { ResidualRun } from '../core/fit/residual.js';
import type { PeriodicErrorBinning, PhaseDomainSums } from '../core/periodic-error.js';
import { ANALYSIS_KERNELS_WASM_BASE64 } from './analysis-kernels-wasm.js';
import { instantiate } from './wasm.js';

interface KernelExports {
  readonly memory: WebAssembly.Memory;
  chunk_pairs(pairs: number, radiusPtr: number, outPtr: number): number;
  residual(n: number, hasUse: number, bins: number, binPerRad: number): void;
  bin_errors(n: number, hasUse: number, bins: number, binPerRad: number): void;
  window_sums(n: number, capacity: number, orders: number, origin: number, cosOrigin: number, sinOrigin: number, centre: number, a2: number, a3: number, w0: number, w1: number, w2: number, w3: number): void;
}

/** Bytes the kernel's memory needs per sample of a window, and beyond them (analysis-kernels.wat). */
const BYTES_PER_SAMPLE = 104;
const BYTES_BEYOND = 1024;

/**
 * The phase-domain estimator's window sums (createPhaseDomainEstimator's `sums`) in WebAssembly SIMD: the same
 * doubles as the core's loops. cos and sin of the offsets are JavaScript's Math.cos and Math.sin, as in the core.
 */
export function createPhaseDomainSums(): PhaseDomainSums | null {
  const kernel = instantiate<KernelExports>(ANALYSIS_KERNELS_WASM_BASE64);
  if (kernel === null) return null;
  let capacity = 0;
  let phase = new Float64Array(0);
  let trig = new Float64Array(0);
  let out = new Float64Array(0);
  /** Lays the memory out for windows of up to `size` samples (in steps of 4096, so it seldom moves). */
  function layout(size: number): void {
    capacity = Math.ceil(size / 4096) * 4096;
    const pages = Math.ceil((BYTES_PER_SAMPLE * capacity + BYTES_BEYOND) / 65536) - kernel!.memory.buffer.byteLength / 65536;
    if (pages > 0) kernel!.memory.grow(pages);
    const buffer = kernel!.memory.buffer;
    phase = new Float64Array(buffer, 0, capacity);
    trig = new Float64Array(buffer, 8 * capacity, 2 * capacity);
    out = new Float64Array(buffer, BYTES_PER_SAMPLE * capacity, BYTES_BEYOND / 8);
  }
  return (values, size, orders, basis, sums) => {
    if (size > capacity) layout(size);
    const origin = values[0]!;
    for (let j = 0; j < size; j++) {
      const p = values[j]!;
      const d = p - origin;
      phase[j] = p;
      trig[2 * j] = Math.cos(d);
      trig[2 * j + 1] = Math.sin(d);
    }
    kernel.window_sums(size, capacity, orders, origin, Math.cos(origin), Math.sin(origin), basis[0]!, basis[1]!, basis[2]!, basis[3]!, basis[4]!, basis[5]!, basis[6]!);
    sums.set(out.subarray(0, 6 + 16 * orders));
  };
}

/** Radii a call of the model watch's kernel takes at most (256 chunks: the model watch asks for that many). */
const WATCH_SAMPLES = 4096;

/**
 * The model watch's chunk sums (createModelWatch's `chunkSums`) in WebAssembly SIMD for a Float32Array of radii (a
 * pipeline's level), two chunks side by side: the same doubles as the core's loop. Other arrays, and a last odd
 * chunk, are left to the core's loop.
 */
export function createModelWatchChunkSums(): ModelWatchChunkSums | null {
  const kernel = instantiate<KernelExports>(ANALYSIS_KERNELS_WASM_BASE64);
  if (kernel === null) return null;
  const buffer = kernel.memory.buffer;
  const radii = new Float32Array(buffer, 0, WATCH_SAMPLES);
  const out = new Float64Array(buffer, 4 * WATCH_SAMPLES, WATCH_SAMPLES / 8);
  return (radius, from, to, sums) => {
    if (!(radius instanceof Float32Array)) return 0;
    const chunk = MODEL_WATCH_CHUNK_SAMPLES;
    const pairs = Math.min(Math.floor((to - from) / (2 * chunk)), sums.length >> 2, WATCH_SAMPLES / (2 * chunk));
    const n = 2 * chunk * pairs;
    // A whole block from its start (the usual call) is copied without a view of its part: no garbage.
    if (from === 0 && radius.length <= WATCH_SAMPLES) radii.set(radius);
    else radii.set(radius.subarray(from, from + n));
    const count = kernel.chunk_pairs(pairs, 0, 4 * WATCH_SAMPLES);
    sums.set(out.subarray(0, 2 * count));
    return count;
  };
}

/**
 * Copies values start..start+n−1 of `from` to the start of `to` (a mask as 0 or 1): typed arrays by a copy of their
 * memory, which needs no warm-up (element loops run interpreted for the first blocks of a run).
 */
function copy(from: ArrayLike<number>, start: number, n: number, to: Float64Array | Uint8Array): void {
  if (from instanceof Float64Array || (from instanceof Uint8Array && to instanceof Uint8Array)) to.set(from.subarray(start, start + n));
  else if (to instanceof Uint8Array) for (let i = 0; i < n; i++) to[i] = from[start + i]! ? 1 : 0;
  else for (let i = 0; i < n; i++) to[i] = from[start + i]!;
}

/**
 * Samples a call of the residual kernel takes (analysis-kernels.wat's layout), where its sums and state lie, and the
 * bytes it uses (up to the end of its per-sample arrays).
 */
const RESIDUAL_SAMPLES = 4096;
const RESIDUAL_SUMS_AT = 69632;
const RESIDUAL_STATE_AT = 69888;
const RESIDUAL_BYTES = 266752;

/**
 * The radius residual's loop (createResidualAnalyzer's `run`) in WebAssembly SIMD: sqrt, the divisions and
 * Math.atan2 (ported operation for operation from the fdlibm code V8 runs) two samples at a time, then what depends on
 * the samples before sample by sample, the eight harmonic orders as pairs [cos kφ, sin kφ] in SIMD lanes: its sums and
 * state are the core's to the bit.
 */
export function createResidualRun(): ResidualRun | null {
  const kernel = instantiate<KernelExports>(ANALYSIS_KERNELS_WASM_BASE64);
  if (kernel === null) return null;
  let views: { u: Float64Array; v: Float64Array; use: Uint8Array; sums: Float64Array; state: Float64Array } | null = null;
  /** Views of the memory, for `stateLength` doubles of state (at most 2·4096 + 30, which the layout leaves room for). */
  function viewsFor(stateLength: number) {
    if (views === null || views.state.length < stateLength) {
      const pages = Math.ceil(RESIDUAL_BYTES / 65536) - kernel!.memory.buffer.byteLength / 65536;
      if (pages > 0) kernel!.memory.grow(pages);
      const buffer = kernel!.memory.buffer;
      views = {
        u: new Float64Array(buffer, 0, RESIDUAL_SAMPLES),
        v: new Float64Array(buffer, 8 * RESIDUAL_SAMPLES, RESIDUAL_SAMPLES),
        use: new Uint8Array(buffer, 16 * RESIDUAL_SAMPLES, RESIDUAL_SAMPLES),
        sums: new Float64Array(buffer, RESIDUAL_SUMS_AT, 19),
        state: new Float64Array(buffer, RESIDUAL_STATE_AT, stateLength),
      };
    }
    return views;
  }
  return (u, v, from, to, use, bins, binPerRad, state, sums) => {
    const memory = viewsFor(state.length);
    memory.state.set(state);
    memory.sums.fill(0);
    // A part of at most RESIDUAL_SAMPLES a call; the sums run on across the calls.
    for (let start = from; start < to; start += RESIDUAL_SAMPLES) {
      const n = Math.min(RESIDUAL_SAMPLES, to - start);
      copy(u, start, n, memory.u);
      copy(v, start, n, memory.v);
      if (use !== undefined) copy(use, start, n, memory.use);
      kernel.residual(n, use === undefined ? 0 : 1, bins, binPerRad);
    }
    state.set(memory.state.subarray(0, state.length));
    sums.set(memory.sums);
  };
}

/** Samples a call of the binning kernel takes, where its bins' sums and counts lie, and the bytes it uses. */
const BINNING_SAMPLES = 4096;
const BINNING_SUMS_AT = 69632;
const BINNING_COUNTS_AT = 102400;
const BINNING_BYTES = 135168;

/**
 * The periodic-error analyzer's binning (createPeriodicErrorAnalyzer's `binning`) in WebAssembly: the same floors,
 * products and sums in the same order, so the same bins to the bit.
 */
export function createPeriodicErrorBinning(): PeriodicErrorBinning | null {
  const kernel = instantiate<KernelExports>(ANALYSIS_KERNELS_WASM_BASE64);
  if (kernel === null) return null;
  const pages = Math.ceil(BINNING_BYTES / 65536) - kernel.memory.buffer.byteLength / 65536;
  if (pages > 0) kernel.memory.grow(pages);
  const buffer = kernel.memory.buffer;
  const phase = new Float64Array(buffer, 0, BINNING_SAMPLES);
  const error = new Float64Array(buffer, 8 * BINNING_SAMPLES, BINNING_SAMPLES);
  const mask = new Uint8Array(buffer, 16 * BINNING_SAMPLES, BINNING_SAMPLES);
  // The bins' views, for the analyzer's number of bins (made again only when it changes).
  let binSums = new Float64Array(0);
  let binCounts = new Float64Array(0);
  return (phaseRad, errorRad, length, use, binPerRad, sums, counts) => {
    const bins = sums.length;
    if (binSums.length !== bins) {
      binSums = new Float64Array(buffer, BINNING_SUMS_AT, bins);
      binCounts = new Float64Array(buffer, BINNING_COUNTS_AT, bins);
    }
    binSums.set(sums);
    binCounts.set(counts);
    for (let start = 0; start < length; start += BINNING_SAMPLES) {
      const n = Math.min(BINNING_SAMPLES, length - start);
      copy(phaseRad, start, n, phase);
      copy(errorRad, start, n, error);
      if (use !== undefined) copy(use, start, n, mask);
      kernel.bin_errors(n, use === undefined ? 0 : 1, bins, binPerRad);
    }
    sums.set(binSums);
    counts.set(binCounts);
  };
}
