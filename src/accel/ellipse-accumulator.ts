// The ellipse fit's accumulator (src/core/fit/accumulator.ts) with its per-sample loop in WebAssembly SIMD
// (fit-kernels.wat): the same moment sums, coverage grid and shift to the bit, in about a third of the time. The
// first sample of a pass and the grid's zooming out stay in JavaScript, as the core does them. The two-pass fit's
// gate (keepWithin) runs there too (`addWithin`), apart from the pairs it hands to Math.hypot. Int16Array pairs (a
// capture's int16 blocks as stored) are copied as they are, a quarter of the bytes, and their grid cells come from
// tables of the 65536 values, which the kernel makes anew when the shift or the grid changes.
import { createEllipseAccumulator, createEllipseFit, type EllipseAccumulator, type EllipseFitOptions } from '../core/index.js';
import { GRID, GRID_BITS, isOccupied, occupy, type AccumulatorState } from '../core/fit/coverage.js';
import { MOMENT_COUNT, shiftMoments } from '../core/fit/moments.js';
import { keepWithin } from '../core/fit/two-pass.js';
import { FIT_KERNELS_WASM_BASE64 } from './fit-kernels-wasm.js';
import { instantiate } from './wasm.js';

interface KernelExports {
  readonly memory: WebAssembly.Memory;
  sums(start: number, count: number, shiftX: number, shiftY: number, half: number, cellsPerUnit: number): number;
  flush(): void;
  gate(start: number, count: number): number;
  sums16(start: number, count: number, shiftX: number, shiftY: number, offGrid: number): number;
  tables(shiftX: number, shiftY: number, half: number, cellsPerUnit: number): void;
  gate16(start: number, count: number): number;
}

/** Pairs the kernel's memory holds at a time; the sums run on across chunks, so chunking changes nothing. */
const CHUNK = 4096;
const SUMS_BYTE = 2048;
const SKIPPED_BYTE = 2176;
/** The gate's counts of pairs kept and near the bounds (i32 each), and its constants (15, each in both lanes of an f64x2). */
const KEPT_BYTE = 2180;
const GATE_BYTE = 2304;
const X_BYTE = 4096;
const Y_BYTE = X_BYTE + 8 * CHUNK;
const CELLS_BYTE = Y_BYTE + 8 * CHUNK;
/** The grid bits the last flush took from the cell bytes. */
const FLUSHED_BYTE = CELLS_BYTE + GRID * GRID;
/** int16 pairs (Int16Array x and y), summed by sums16 with the cells from the kernel's tables (see fit-kernels.wat). */
const X16_BYTE = 90112;
const Y16_BYTE = X16_BYTE + 2 * CHUNK;
/** Where the kernel's running sum of each moment (`momentIndex` order) is, from Σ u on; Σ 1 is the count summed. */
const RUNNING = [0, 1, 2, 3, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14];

/**
 * What another WebAssembly accumulator's fused `addWithin` (its `all`) needs of this one. The grid marks of the
 * chunks summed for both stay in the other's cell bytes until one of the two needs its grid (`owe`, `settle`): the
 * bytes are flushed once for both, not once a chunk.
 */
interface Partner {
  /**
   * True when this accumulator sums about (shiftX, shiftY) on a grid of that half-width (the caller's, whose kernel
   * summed every pair itself, so its half-width is not 0 and this one, reset, would have another).
   */
  inFrame(shiftX: number, shiftY: number, gridHalfWidth: number): boolean;
  /** Adds the moments `add` of `count` finite pairs inside the grid adds (their running sums). */
  absorb(running: Float64Array, count: number): void;
  /** The other holds grid marks of this one's: `flush` (which settles them here) before this grid is read or changed. */
  owe(flush: () => void): void;
  /** ORs the marks owed into the grid. */
  settle(bits: Uint32Array): void;
}

const partners = new WeakMap<EllipseAccumulator, Partner>();

/**
 * An `EllipseAccumulator` whose `add` runs in WebAssembly SIMD, with the same state after any sequence of calls
 * as the core's `createEllipseAccumulator` (bit for bit); the core's accumulator itself where WebAssembly SIMD is
 * missing. Options as the core's.
 */
export function createFastEllipseAccumulator(options: EllipseFitOptions = {}): EllipseAccumulator {
  return createWasmEllipseAccumulator(options) ?? createEllipseAccumulator(options);
}

/** The WebAssembly accumulator, or null where WebAssembly SIMD is missing. */
export function createWasmEllipseAccumulator(options: EllipseFitOptions = {}): EllipseAccumulator | null {
  const fit = createEllipseFit({ ...options, method: 'heydemann' });
  const kernel = instantiate<KernelExports>(FIT_KERNELS_WASM_BASE64);
  if (kernel === null) return null;
  const memory = kernel.memory.buffer;
  const occupancy = new Uint32Array(memory, 0, (GRID * GRID) / 32);
  const running = new Float64Array(memory, SUMS_BYTE, 16);
  const skippedWord = new Int32Array(memory, SKIPPED_BYTE, 1);
  const gateCounts = new Int32Array(memory, KEPT_BYTE, 2);
  const gateConstants = new Float64Array(memory, GATE_BYTE, 30);
  const oneX = new Float64Array(1);
  const oneY = new Float64Array(1);
  const chunkX = new Float64Array(memory, X_BYTE, CHUNK);
  const chunkY = new Float64Array(memory, Y_BYTE, CHUNK);
  const chunkX16 = new Int16Array(memory, X16_BYTE, CHUNK);
  const chunkY16 = new Int16Array(memory, Y16_BYTE, CHUNK);
  const moments = new Float64Array(MOMENT_COUNT);
  const scratch = new Float64Array(MOMENT_COUNT);
  const cells = new Uint8Array(memory, CELLS_BYTE, GRID * GRID);
  const flushed = new Uint32Array(memory, FLUSHED_BYTE, occupancy.length);
  const zoomed = new Uint32Array(occupancy.length);
  // The kernel marks cells as bytes; `marked` says some may not be in the bits yet. `sharedWith`: all the bytes are
  // also the marks of that accumulator (fused addWithin), `owedBy`: another's bytes hold marks of this grid.
  let marked = false;
  let sharedWith: Partner | null = null;
  let owedBy: (() => void) | null = null;
  let shiftX = 0;
  let shiftY = 0;
  let hasShift = false;
  let skippedNonFinite = 0;
  let gridHalfWidth = 0;
  // The shift and grid the kernel's cell tables were made for (sums16).
  let tablesShiftX = NaN;
  let tablesShiftY = NaN;
  let tablesHalfWidth = NaN;

  // mark and zoomOut are the core's (accumulator.ts), over the grid in the kernel's memory; zoomOut flushes first and
  // visits the occupied cells word by word (the grid is mostly empty when it zooms, early in a pass).
  function flush(): void {
    if (owedBy !== null) owedBy();
    if (marked) kernel!.flush();
    marked = false;
    if (sharedWith !== null) {
      sharedWith.settle(flushed);
      sharedWith = null;
    }
  }

  function zoomOut(): void {
    flush();
    zoomed.fill(0);
    for (let word = 0; word < occupancy.length; word++) {
      for (let bits = occupancy[word]! | 0; bits !== 0; bits &= bits - 1) {
        const index = (word << 5) | (31 - Math.clz32(bits & -bits));
        occupy(zoomed, (GRID / 4 + ((index >> GRID_BITS) >> 1)) * GRID + GRID / 4 + ((index & (GRID - 1)) >> 1));
      }
    }
    occupancy.set(zoomed);
    gridHalfWidth *= 2;
  }

  function mark(u: number, v: number): void {
    if (gridHalfWidth === 0) {
      const reach = Math.max(Math.abs(u), Math.abs(v));
      if (reach === 0) return;
      gridHalfWidth = 2 * reach;
      mark(0, 0); // the first sample, at the shift
    }
    while (!(Math.abs(u) < gridHalfWidth && Math.abs(v) < gridHalfWidth)) zoomOut();
    const cellsPerUnit = GRID / (2 * gridHalfWidth);
    const col = Math.floor((u + gridHalfWidth) * cellsPerUnit);
    const row = Math.floor((v + gridHalfWidth) * cellsPerUnit);
    occupy(occupancy, Math.min(GRID - 1, row) * GRID + Math.min(GRID - 1, col));
  }

  /**
   * Copies pairs [start, start + n) of x, y to the kernel's chunk: int16 arrays to its int16 chunk (true), anything
   * else as doubles.
   */
  function load(x: ArrayLike<number>, y: ArrayLike<number>, start: number, n: number): boolean {
    if (x instanceof Int16Array && y instanceof Int16Array) {
      if (start === 0 && x.length === n && y.length === n) {
        chunkX16.set(x);
        chunkY16.set(y);
      } else {
        for (let i = 0; i < n; i++) {
          chunkX16[i] = x[start + i]!;
          chunkY16[i] = y[start + i]!;
        }
      }
      return true;
    }
    if (x instanceof Float64Array && y instanceof Float64Array && start === 0 && x.length === n && y.length === n) {
      // A whole block of at most CHUNK pairs (a capture's blocks): copied as memory.
      chunkX.set(x);
      chunkY.set(y);
    } else {
      for (let i = 0; i < n; i++) {
        chunkX[i] = x[start + i]!;
        chunkY[i] = y[start + i]!;
      }
    }
    return false;
  }

  /**
   * Adds the chunk's first n pairs to the running sums, marking the cell bytes for this accumulator and `shared`. True
   * when the shift was set before and the kernel summed and marked every pair itself (all finite, on the grid as it was).
   */
  function sumChunk(n: number, shared: Partner | null, int16: boolean): boolean {
    // Bytes marked for others than these are settled first; a zoom out (in mark) settles them too.
    if (sharedWith !== shared) flush();
    const xs = int16 ? chunkX16 : chunkX;
    const ys = int16 ? chunkY16 : chunkY;
    let i = 0;
    let clean = hasShift;
    if (!hasShift) {
      // The first finite pair sets the shift; the kernel then sums it (u = v = 0) and skips those before it.
      let first = 0;
      while (first < n && !(Number.isFinite(xs[first]!) && Number.isFinite(ys[first]!))) first++;
      if (first === n) {
        skippedWord[0] += n;
        return false;
      }
      shiftX = xs[first]!;
      shiftY = ys[first]!;
      hasShift = true;
    }
    while (i < n) {
      marked = true;
      let at: number;
      if (int16) {
        // Without a grid yet every pair is off it (sums' test against a half-width of 0): no tables needed.
        const gridless = gridHalfWidth === 0;
        if (!gridless && !(Object.is(tablesShiftX, shiftX) && Object.is(tablesShiftY, shiftY) && tablesHalfWidth === gridHalfWidth)) {
          kernel!.tables(shiftX, shiftY, gridHalfWidth, GRID / (2 * gridHalfWidth));
          tablesShiftX = shiftX;
          tablesShiftY = shiftY;
          tablesHalfWidth = gridHalfWidth;
        }
        at = kernel!.sums16(i, n, shiftX, shiftY, gridless ? 0x8000 : 0);
      } else at = kernel!.sums(i, n, shiftX, shiftY, gridHalfWidth, GRID / (2 * gridHalfWidth));
      if (at >= 0) break;
      i = -at;
      clean = false;
      mark(xs[i - 1]! - shiftX, ys[i - 1]! - shiftY);
    }
    return clean && skippedWord[0] === 0;
  }

  /** Adds the running sums of `count` pairs to the moments, as the core's add does at its end. */
  function endAdd(count: number): void {
    const skipped = skippedWord[0]!;
    skippedNonFinite += skipped;
    moments[0] += count - skipped;
    for (let k = 1; k < MOMENT_COUNT; k++) moments[k] += running[RUNNING[k - 1]!]!;
    running.fill(0);
    skippedWord[0] = 0;
  }

  function add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void {
    for (let start = 0; start < length; start += CHUNK) {
      const n = Math.min(CHUNK, length - start);
      sumChunk(n, null, load(x, y, start, n));
    }
    endAdd(length);
  }

  /** Constant k of the gate, in both lanes. */
  function setGateConstant(k: number, value: number): void {
    gateConstants[2 * k] = value;
    gateConstants[2 * k + 1] = value;
  }

  function addWithin(
    x: ArrayLike<number>,
    y: ArrayLike<number>,
    length: number,
    coefficients: Float64Array,
    lowRadius: number,
    highRadius: number,
    band: number,
    near: Float64Array,
    all?: EllipseAccumulator,
  ): void {
    // A block of one chunk is summed once for both accumulators while the gate keeps all of it and both sum about the
    // same shift on the same grid; any other `all` gets its own add, as if it came first.
    let partner = all === undefined ? undefined : partners.get(all);
    if (all !== undefined && (partner === undefined || all === accumulator || length > CHUNK)) {
      all.add(x, y, length);
      partner = undefined;
    }
    // keepWithin's constants, computed as it computes them.
    const low2 = lowRadius * lowRadius, high2 = highRadius * highRadius;
    const surelyAbove = low2 * (1 + 1e-6), surelyUnder = high2 * (1 - 1e-6);
    const lowOut = (lowRadius + band) ** 2, highIn = (highRadius - band) ** 2;
    for (let k = 0; k < 5; k++) setGateConstant(k, coefficients[k]!);
    setGateConstant(5, surelyAbove);
    setGateConstant(6, surelyUnder);
    setGateConstant(7, low2 * (1 - 1e-6));
    setGateConstant(8, high2 * (1 + 1e-6));
    setGateConstant(9, (lowRadius - band) ** 2);
    setGateConstant(10, lowOut);
    setGateConstant(11, highIn);
    setGateConstant(12, (highRadius + band) ** 2);
    // Between these, a pair is surely kept and not near a bound.
    setGateConstant(13, Math.max(surelyAbove, lowOut));
    setGateConstant(14, Math.min(surelyUnder, highIn));
    for (let start = 0; start < length; start += CHUNK) {
      const n = Math.min(CHUNK, length - start);
      const int16 = load(x, y, start, n);
      const xs = int16 ? chunkX16 : chunkX;
      const ys = int16 ? chunkY16 : chunkY;
      gateCounts.fill(0);
      for (let i = 0; (i = int16 ? kernel!.gate16(i, n) : kernel!.gate(i, n)) < n; i++) {
        // A pair near a bound (or the last of an odd count): keepWithin's own decision.
        if (keepWithin(xs, ys, i, i + 1, coefficients, lowRadius, highRadius, oneX, oneY, band, near) === 1) {
          const kept = gateCounts[0]!;
          xs[kept] = oneX[0]!;
          ys[kept] = oneY[0]!;
          gateCounts[0] = kept + 1;
        }
      }
      near[0] += gateCounts[1]!;
      const kept = gateCounts[0]!;
      if (partner === undefined) {
        sumChunk(kept, null, int16);
      } else if (kept === n && partner.inFrame(shiftX, shiftY, gridHalfWidth)) {
        // The chunk is still the block as it came (the gate moved no pair), and both grids mark the same cells.
        if (sumChunk(kept, partner, int16)) {
          partner.absorb(running, kept);
          if (sharedWith === null) partner.owe(flush);
          sharedWith = partner;
        } else {
          // A zoom out settled the bytes; the partner sums the block itself (marking again the cells settled).
          all!.add(x, y, length);
        }
      } else {
        sumChunk(kept, null, int16);
        all!.add(x, y, length);
      }
      endAdd(kept);
    }
  }

  // merge is the core's (accumulator.ts).
  function merge(other: EllipseAccumulator): void {
    const theirs = other.state;
    skippedNonFinite += other.skippedNonFinite;
    if (theirs.moments[0] === 0) return;
    const incoming = Float64Array.from(theirs.moments);
    if (!hasShift) {
      shiftX = theirs.shiftX;
      shiftY = theirs.shiftY;
      hasShift = true;
    } else {
      shiftMoments(incoming, theirs.shiftX - shiftX, theirs.shiftY - shiftY, scratch);
    }
    for (let k = 0; k < MOMENT_COUNT; k++) moments[k] += incoming[k]!;
    const d = theirs.shiftX - shiftX;
    const e = theirs.shiftY - shiftY;
    const cell = (2 * theirs.gridHalfWidth) / GRID;
    for (let index = 0; index < GRID * GRID; index++) {
      if (isOccupied(theirs.occupancy, index)) {
        mark(-theirs.gridHalfWidth + ((index & (GRID - 1)) + 0.5) * cell + d, -theirs.gridHalfWidth + ((index >> GRID_BITS) + 0.5) * cell + e);
      }
    }
  }

  function state(): AccumulatorState {
    flush();
    return { shiftX, shiftY, moments, occupancy, gridHalfWidth };
  }

  function reset(): void {
    flush(); // settles the marks shared with another accumulator, or owed by one
    moments.fill(0);
    occupancy.fill(0);
    cells.fill(0);
    running.fill(0);
    marked = false;
    gridHalfWidth = 0;
    hasShift = false;
    skippedNonFinite = 0;
  }

  reset();
  const accumulator: EllipseAccumulator = {
    add,
    addWithin,
    merge,
    reset,
    solve: () => fit.solve(accumulator),
    get samples() {
      return moments[0]!;
    },
    get skippedNonFinite() {
      return skippedNonFinite;
    },
    get state() {
      return state();
    },
  };
  partners.set(accumulator, {
    inFrame: (otherX, otherY, otherHalfWidth) =>
      Object.is(otherX, shiftX) && Object.is(otherY, shiftY) && otherHalfWidth === gridHalfWidth,
    absorb(sums, count) {
      moments[0] += count;
      for (let k = 1; k < MOMENT_COUNT; k++) moments[k] += sums[RUNNING[k - 1]!]!;
    },
    owe(settleThem) {
      if (owedBy !== null && owedBy !== settleThem) owedBy();
      owedBy = settleThem;
    },
    settle(bits) {
      owedBy = null;
      for (let w = 0; w < occupancy.length; w++) occupancy[w] |= bits[w]!;
    },
  });
  return accumulator;
}
