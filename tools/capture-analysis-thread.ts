// The capture analyses (capture-analyses.ts) on a worker thread: the pipeline's thread writes each block's output
// straight into a slot of a shared ring, copies the capture's samples beside it, and goes on with the next block
// while the worker analyses this one. On two cores a replay then takes about as long as its pipeline alone, not
// the sum of both. The worker runs the same code on the same data in the same order: the same results.

import { createAnalysisWorker, takePreparedWorker } from './analysis-worker-start.js';
import {
  BLOCK_OUTPUT_BYTES,
  CAPTURE_BLOCK_SAMPLES,
  createBlockOutput,
  createCaptureAnalyses,
  type AnalysedBlock,
  type AnalysisConfig,
  type AnalysisResults,
  type BlockOutput,
} from './capture-analyses.js';
import { steadyKernelBytes } from '../src/accel/index.js';
import type { BlockSamples } from '../src/io/capture/index.js';

/**
 * Blocks in flight between the two threads by default: enough to hold what the pipeline runs while the worker
 * analyses one block the periodic-error and radius analyses take (about 30 of the pipeline's blocks), so neither
 * side waits for the other's burst. 17 MiB, whatever the run's length.
 */
export const RING_SLOTS = 64;
/**
 * A waiting pipeline is woken once this many slots are free, not for each: a wake-up is a system call and a thread
 * switch, which cost as much as copying a block's samples, more on a busy machine.
 */
const WAKE_BATCH = 16;
/**
 * A worker that has caught up looks again after this long (ms) by itself: the pipeline's side wakes it only when
 * the ring is nearly full, or at the end. A wake-up sent from the pipeline's thread cost it about a millisecond
 * each on a busy machine (the woken worker took its core), 0.3 s of a 3·10⁷-sample replay; the pipeline fills
 * WAKE_BATCH slots in about that time, so the worker finds a batch waiting.
 */
const WORKER_POLL_MS = 1;
// Control words: blocks handed over, blocks analysed, finish asked, whether the worker is (about to be) waiting,
// and the count of blocks analysed the pipeline's side waits for (0: not waiting): a wake-up is sent only then,
// not for every block.
const WRITTEN = 0;
const READ = 1;
const FINISH = 2;
const WORKER_WAITING = 3;
const PIPELINE_WAITING = 4;
const CONTROL_BYTES = 24;
/** Where the worker's in-place block summary keeps its lanes, from the ring's base (createSharedBlockSummary: 176 bytes, 16-aligned). */
export const SUMMARY_LANES_AT = 32;
/** Where the slot of each block handed over is noted (an int32 for each of the last `slots` blocks), from the base. */
const ORDER_AT = SUMMARY_LANES_AT + 176;
/** Bytes before the first slot: the control words, the summary's lanes, the order of the slots (16-aligned). */
const headBytes = (slots: number) => ORDER_AT + Math.ceil(slots / 4) * 16;
/** A slot: the pipeline's output, then x, y, times and the phase before harmonics (f64 each), then its header. */
const SAMPLES_BYTES = 8 * CAPTURE_BLOCK_SAMPLES;
const HEADER_BYTES = 48;
const SLOT_BYTES = BLOCK_OUTPUT_BYTES + 4 * SAMPLES_BYTES + HEADER_BYTES;

/** A slot's arrays over the shared buffer, the same on both threads. */
export interface RingSlot {
  readonly output: BlockOutput;
  readonly x: Float64Array;
  readonly y: Float64Array;
  readonly t: Float64Array;
  readonly phaseBeforeHarmonics: Float64Array;
  /**
   * firstIndex, length, whether t holds times, whether phaseBeforeHarmonics holds a phase, whether analysed (x, y
   * copied), whether a block left out (then only its length counts).
   */
  readonly header: Float64Array;
}

export interface AnalysisRing {
  readonly control: Int32Array;
  /** The slot of block k (in the order handed over) is order[k % slots.length]. */
  readonly order: Int32Array;
  readonly slots: readonly RingSlot[];
}

/** The ring of `count` slots in `buffer` from byte `base` (the bytes before it are the pipeline's kernel's, see createRingMemory). */
export function ringOf(buffer: SharedArrayBuffer, base: number, count: number): AnalysisRing {
  const slots: RingSlot[] = [];
  for (let k = 0; k < count; k++) {
    const at = base + headBytes(count) + k * SLOT_BYTES;
    const samples = (index: number) => new Float64Array(buffer, at + BLOCK_OUTPUT_BYTES + index * SAMPLES_BYTES, CAPTURE_BLOCK_SAMPLES);
    slots.push({
      output: createBlockOutput(buffer, at),
      x: samples(0),
      y: samples(1),
      t: samples(2),
      phaseBeforeHarmonics: samples(3),
      header: new Float64Array(buffer, at + BLOCK_OUTPUT_BYTES + 4 * SAMPLES_BYTES, 6),
    });
  }
  return { control: new Int32Array(buffer, base, CONTROL_BYTES / 4), order: new Int32Array(buffer, base + ORDER_AT, count), slots };
}

/** The block in a slot, as the analyses take it (views of the slot's arrays, `length` long). */
export function blockInSlot(slot: RingSlot): AnalysedBlock {
  const [firstIndex, length, hasTimes, hasPhase, analysed] = slot.header as unknown as [number, number, number, number, number];
  const view = <T extends Float64Array | Float32Array | Uint8Array>(array: T) => (length === CAPTURE_BLOCK_SAMPLES ? array : (array.subarray(0, length) as T));
  const o = slot.output;
  return {
    firstIndex,
    length,
    t: hasTimes ? view(slot.t) : null,
    analysed: analysed === 1,
    x: analysed ? view(slot.x) : null,
    y: analysed ? view(slot.y) : null,
    output: { positionM: view(o.positionM), velocityMS: view(o.velocityMS), level: view(o.level), flags: view(o.flags), unwrappedPhaseRad: view(o.unwrappedPhaseRad), power: view(o.power) },
    phaseBeforeHarmonics: hasPhase ? view(slot.phaseBeforeHarmonics) : null,
  };
}

export { analysisThreadAvailable } from './analysis-worker-start.js';

export const WORKER_CONTROL = { WRITTEN, READ, FINISH, WORKER_WAITING, PIPELINE_WAITING, WORKER_POLL_MS } as const;

/**
 * The pipeline's side of the analyses: the ring to the worker (startAnalysisThread), or the same calls on this
 * thread (analysesInLine), so a run is written once for both.
 */
/** A block as the run hands it over: its samples may be the capture's int16 as stored (the analyses take them as doubles). */
export type HandedBlock = Omit<AnalysedBlock, 'output' | 'x' | 'y'> & { readonly x: BlockSamples | null; readonly y: BlockSamples | null };

export interface AnalysisThread {
  /**
   * The arrays the pipeline writes the next block's output into, once the worker is done with their slot; the same
   * until `add` or `skip` hands the block over (which each need a `next` before them).
   */
  next(): Promise<BlockOutput>;
  /** The array to keep the phase in before a harmonic correction (three or four outputs), in the same slot. */
  phaseSlot(): Float64Array;
  /**
   * Hands the block over: its times and, for an analysed block, its samples are copied into the slot of `next`'s
   * arrays (the phase before harmonics is already there, see phaseSlot).
   */
  add(block: HandedBlock): void;
  /**
   * Hands over a block left out of the analyses (CaptureAnalyses.skip) in the slot of `next`'s arrays, which it
   * leaves unread: only its length counts.
   */
  skip(length: number): void;
  /** Waits for the worker to analyse every block handed over and returns its results. */
  finish(): Promise<AnalysisResults>;
  /** Stops the worker (after a failure on the pipeline's side). */
  terminate(): Promise<void>;
}

type WaitAsync = (array: Int32Array, index: number, value: number, timeoutMs: number) => { async: false; value: string } | { async: true; value: Promise<string> };
const waitAsync = (Atomics as unknown as { waitAsync: WaitAsync }).waitAsync;

/** The ring's shared bytes, and where in them the ring starts. */
export interface RingMemory {
  /** Null without shared WebAssembly memory: `buffer` is then plain shared bytes. */
  readonly memory: WebAssembly.Memory | null;
  readonly buffer: SharedArrayBuffer;
  readonly base: number;
  readonly slots: number;
}

/**
 * The ring's shared bytes: a shared WebAssembly memory where the engine has one, so that the worker's block summary
 * reads the slots in place (createSharedBlockSummary) and the pipeline's steady kernel, which takes the bytes before
 * the ring (AcceleratedPipelineOptions.kernelMemory), writes its outputs into the slots in place: copies into shared
 * memory go element by element, at about twice the cost of the kernel's own stores. Else plain shared bytes (the
 * worker then copies, and so does the pipeline).
 */
export function createRingMemory(slots = RING_SLOTS): RingMemory {
  const base = steadyKernelBytes();
  const bytes = base + headBytes(slots) + slots * SLOT_BYTES;
  // Room for the kernel to grow into for a block longer than CAPTURE_BLOCK_SAMPLES (none in a run, see steadyKernelBytes).
  const pages = Math.ceil(bytes / 65536);
  try {
    const memory = new WebAssembly.Memory({ initial: pages, maximum: 2 * pages, shared: true });
    return { memory, buffer: memory.buffer as unknown as SharedArrayBuffer, base, slots };
  } catch {
    // No WebAssembly, or no shared memory in it: the same ring over plain shared bytes.
    return { memory: null, buffer: new SharedArrayBuffer(bytes), base, slots };
  }
}

/**
 * The analyses run in line, behind the same calls: one output record and one phase array, reused for every block
 * (each block is analysed in `add`, before `next` hands them out again).
 */
export function analysesInLine(config: AnalysisConfig): AnalysisThread {
  const analyses = createCaptureAnalyses(config);
  const output = createBlockOutput();
  const ready = Promise.resolve(output);
  const phase = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const x = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const y = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const asDoubles = (samples: BlockSamples | null, into: Float64Array) => (samples === null || samples instanceof Float64Array ? samples : (into.set(samples), into.subarray(0, samples.length)));
  return {
    next: () => ready,
    phaseSlot: () => phase,
    add: (block) => analyses.add({ ...block, x: asDoubles(block.x, x), y: asDoubles(block.y, y), output }),
    skip: (length) => analyses.skip(length),
    finish: async () => analyses.finish(),
    terminate: async () => undefined,
  };
}

export interface SlotPicker {
  /**
   * The slot for the next block once the worker has read `read` blocks (fewer than `order.length` in flight), the
   * same until handOver.
   */
  take(read: number): number;
  /** Notes the slot taken as block `block`'s, where the worker looks (order[block % order.length]). */
  handOver(block: number): void;
}

/**
 * Which slot of the ring each block takes: the one freed last. While the worker keeps up, the next block then takes
 * the slot it has just freed, still in cache, rather than the next of all slots (17 MiB for 64, cold by the time the
 * ring comes round): in a single-thread check the kernel wrote its positions and velocities into 16 slots taken in
 * turn at 2.1 ns a sample, into 64 at 4.1.
 */
export function createSlotPicker(order: Int32Array): SlotPicker {
  const slots = order.length;
  const free = Int32Array.from({ length: slots }, (_, k) => slots - 1 - k);
  let freeCount = slots;
  let freedUpTo = 0; // blocks whose slots are back among the free
  let current = -1;
  return {
    take(read) {
      if (current >= 0) return current;
      for (; freedUpTo < read; freedUpTo++) free[freeCount++] = order[freedUpTo % slots]!;
      current = free[--freeCount]!;
      return current;
    },
    handOver(block) {
      order[block % slots] = current;
      current = -1;
    },
  };
}

/** Starts the worker (the compiled capture-analysis-worker.js beside this file), or takes the one prepared. */
export function startAnalysisThread(config: AnalysisConfig, ringMemory: RingMemory = createRingMemory()): AnalysisThread {
  const { memory, buffer, base, slots: count } = ringMemory;
  const ring = ringOf(buffer, base, count);
  const { control, order, slots } = ring;
  const ahead = takePreparedWorker();
  const worker = ahead?.worker ?? createAnalysisWorker();
  worker.ref();
  worker.postMessage({ config, buffer, memory, base, slots: count });
  let failure: Error | null = ahead?.failure ?? null;
  let settled = false;
  const results = new Promise<AnalysisResults>((resolve, reject) => {
    const fail = (error: Error) => {
      failure ??= error;
      settled = true;
      reject(failure);
    };
    worker.on('message', (message: { results?: AnalysisResults; error?: { message: string; stack?: string } }) => {
      if (message.results !== undefined) {
        settled = true;
        resolve(message.results);
      } else if (message.error !== undefined) {
        const error = new Error(`capture analyses: ${message.error.message}`);
        if (message.error.stack !== undefined) error.stack = message.error.stack;
        fail(error);
      }
    });
    worker.on('error', fail);
    worker.on('exit', (code) => {
      if (!settled) fail(new Error(`capture analyses: the worker thread stopped (exit code ${code}) before its results`));
    });
  });
  // Until finish() awaits it, a failure is seen through `failure`.
  results.catch(() => undefined);
  let written = 0;
  const picker = createSlotPicker(order);
  let current = -1;

  /** The slot of `next` to the worker. */
  function handOver(): void {
    picker.handOver(written);
    current = -1;
    written++;
    Atomics.store(control, WRITTEN, written);
    // Only a nearly full ring wakes the worker (it looks by itself every WORKER_POLL_MS), once a sleep: the flag is
    // taken down here.
    if (written - Atomics.load(control, READ) >= count - WAKE_BATCH && Atomics.compareExchange(control, WORKER_WAITING, 1, 0) === 1) Atomics.notify(control, WRITTEN);
  }

  return {
    async next() {
      if (current >= 0) return slots[current]!.output;
      while (written - Atomics.load(control, READ) >= count) {
        if (failure !== null) throw failure;
        // A full ring waits for WAKE_BATCH free slots, not one: woken for every block, the two threads would take
        // turns a block at a time, a wake-up each. The worker wakes this side once it has read `target` blocks.
        const target = written - count + WAKE_BATCH;
        Atomics.store(control, PIPELINE_WAITING, target);
        // Read after the target is up, so blocks read in between are not waited for (the timeout only re-checks
        // for a failure of the worker).
        const read = Atomics.load(control, READ);
        if (read < target) {
          const wait = waitAsync(control, READ, read, 200);
          if (wait.async) await wait.value;
        }
        Atomics.store(control, PIPELINE_WAITING, 0);
      }
      if (failure !== null) throw failure;
      current = picker.take(Atomics.load(control, READ));
      return slots[current]!.output;
    },
    phaseSlot() {
      return slots[current]!.phaseBeforeHarmonics;
    },
    skip(length) {
      const slot = slots[current]!;
      slot.header[1] = length;
      slot.header[5] = 1;
      handOver();
    },
    add(block) {
      const slot = slots[current]!;
      if (block.analysed) {
        slot.x.set(block.x!.subarray(0, block.length));
        slot.y.set(block.y!.subarray(0, block.length));
      }
      if (block.t !== null) slot.t.set(block.t.subarray(0, block.length));
      slot.header[0] = block.firstIndex;
      slot.header[1] = block.length;
      slot.header[2] = block.t === null ? 0 : 1;
      slot.header[3] = block.phaseBeforeHarmonics === null ? 0 : 1;
      slot.header[4] = block.analysed ? 1 : 0;
      slot.header[5] = 0;
      handOver();
    },
    async finish() {
      Atomics.store(control, FINISH, 1);
      Atomics.notify(control, WRITTEN);
      return await results;
    },
    async terminate() {
      settled = true;
      await worker.terminate();
    },
  };
}
