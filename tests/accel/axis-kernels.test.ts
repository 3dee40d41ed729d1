// The axis builder's kernels (src/accel/axis-kernels.ts): the WebAssembly SIMD split and block summary give the
// JavaScript loops' results to the bit, for any channel layout, block length and values (NaN, ±0, ±Infinity).
// Reference: the interleaving rule of FrameBlock (sample s of channel c at s·channelCount + c, docs/wire-format.md)
// read directly, and the JavaScript summary loop (`if (x < min) min = x`, the builder's loop before the kernels).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createAxisKernels, createJsAxisKernels, createSharedBlockSummary, createWasmAxisKernels, type AxisKernels, type BlockExtremes } from '../../src/accel/axis-kernels.js';

function wasmKernels(outputs: readonly number[], capacity: number): AxisKernels {
  const made = createWasmAxisKernels(outputs, capacity);
  if (made === null) throw new Error('WebAssembly SIMD is missing in this Node: the accel tests need it');
  return made;
}

const layout = fc.array(fc.integer({ min: 2, max: 4 }), { minLength: 1, maxLength: 8 }).filter((outputs) => outputs.reduce((a, b) => a + b, 0) <= 16);

function extremes(kernels: AxisKernels, axis: number, length: number): BlockExtremes {
  const into: BlockExtremes = { positionMinM: 0, positionMaxM: 0, velocityMinMS: 0, velocityMaxMS: 0, levelMin: 0, flagsSeen: 0 };
  kernels.summarise(axis, length, into);
  return into;
}

function fill(kernels: AxisKernels, axis: number, values: { p: number[]; v: number[]; l: number[]; f: number[] }): void {
  const region = kernels.regions[axis]!;
  region.positionM.set(values.p);
  region.velocityMS.set(values.v);
  region.level.set(values.l);
  region.flags.set(values.f);
}

/** Every field equal as Object.is has it (NaN equals NaN, 0 differs from −0). */
function expectSame(actual: BlockExtremes, expected: BlockExtremes): void {
  for (const key of Object.keys(expected) as (keyof BlockExtremes)[]) expect(Object.is(actual[key], expected[key]), `${key}: ${actual[key]} vs ${expected[key]}`).toBe(true);
}

describe('axis kernels', () => {
  it('are WebAssembly SIMD in this Node', () => {
    expect(createAxisKernels([2], 0).kind).toBe('wasm-simd');
  });

  it('split every axis of any layout and block length as the interleaving rule reads it, growing past their capacity', () => {
    fc.assert(
      fc.property(layout, fc.integer({ min: 0, max: 300 }), fc.integer(), (outputs, frames, seed) => {
        const channelCount = outputs.reduce((a, b) => a + b, 0);
        const samples = new Int16Array(frames * channelCount);
        let state = seed >>> 0;
        for (let i = 0; i < samples.length; i++) {
          state = (Math.imul(state, 1664525) + 1013904223) >>> 0;
          samples[i] = (state >>> 16) - 32768;
        }
        for (const kernels of [wasmKernels(outputs, 64), createJsAxisKernels(outputs, 64)]) {
          kernels.load(samples, frames, channelCount);
          let first = 0;
          outputs.forEach((count, axis) => {
            kernels.split(axis, first);
            const inputs = kernels.regions[axis]!.inputs;
            expect(inputs.length).toBe(count);
            for (let c = 0; c < count; c++) {
              for (let s = 0; s < frames; s++) if (inputs[c]![s] !== samples[s * channelCount + first + c]) throw new Error(`${kernels.kind}: axis ${axis} output ${c} sample ${s}`);
            }
            first += count;
          });
          expect(kernels.capacity).toBeGreaterThanOrEqual(frames);
        }
      }),
    );
  });

  it('summarise any block as the JavaScript loop does, to the bit (NaN, ±0, ±Infinity, ties)', () => {
    // Few distinct values make ties and zeros of both signs common.
    const value = fc.oneof(fc.constantFrom(0, -0, Number.NaN, Infinity, -Infinity, 1e-9, -1e-9), fc.double());
    const level = fc.oneof(fc.constantFrom(0, -0, Number.NaN, Infinity, 1), fc.float());
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 200 }).chain((n) => fc.record({
        p: fc.array(value, { minLength: n, maxLength: n }),
        v: fc.array(value, { minLength: n, maxLength: n }),
        l: fc.array(level, { minLength: n, maxLength: n }),
        f: fc.array(fc.integer({ min: 0, max: 255 }), { minLength: n, maxLength: n }),
      })), (values) => {
        const n = values.p.length;
        const wasm = wasmKernels([2, 3], 16);
        const js = createJsAxisKernels([2, 3], 16);
        for (const kernels of [wasm, js]) {
          kernels.reserve(n);
          fill(kernels, 1, values);
        }
        expectSame(extremes(wasm, 1, n), extremes(js, 1, n));
      }),
    );
  });

  it('summarise in place over a shared memory as the JavaScript loop does, wherever the arrays lie in it', () => {
    // As the capture analyses' worker reads the ring's slots (tools/capture-analysis-thread.ts): four arrays at
    // 8-byte aligned places of a shared memory, each with room for its padding to 16 samples.
    const value = fc.oneof(fc.constantFrom(0, -0, Number.NaN, Infinity, -Infinity, 1e-9), fc.double());
    const level = fc.oneof(fc.constantFrom(0, -0, Number.NaN, Infinity, 1), fc.float());
    const memory = new WebAssembly.Memory({ initial: 2, maximum: 2, shared: true });
    const buffer = memory.buffer as unknown as SharedArrayBuffer;
    const shared = createSharedBlockSummary(memory, 0);
    expect(shared).not.toBeNull();
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 200 }).chain((n) => fc.record({
        at: fc.integer({ min: 0, max: 16 }),
        p: fc.array(value, { minLength: n, maxLength: n }),
        v: fc.array(value, { minLength: n, maxLength: n }),
        l: fc.array(level, { minLength: n, maxLength: n }),
        f: fc.array(fc.integer({ min: 0, max: 255 }), { minLength: n, maxLength: n }),
      })), ({ at, ...values }) => {
        const n = values.p.length;
        const room = Math.ceil(n / 16) * 16;
        const start = 176 + 8 * at; // past the lanes, 8-byte aligned, not always 16
        const outputs = {
          positionM: new Float64Array(buffer, start, room),
          velocityMS: new Float64Array(buffer, start + 8 * room, room),
          level: new Float32Array(buffer, start + 16 * room, room),
          flags: new Uint8Array(buffer, start + 20 * room, room),
        };
        outputs.positionM.set(values.p);
        outputs.velocityMS.set(values.v);
        outputs.level.set(values.l);
        outputs.flags.set(values.f);
        const js = createJsAxisKernels([2], 16);
        js.reserve(n);
        fill(js, 0, values);
        expect(shared!.holds(outputs)).toBe(true);
        const into: BlockExtremes = { positionMinM: 0, positionMaxM: 0, velocityMinMS: 0, velocityMaxMS: 0, levelMin: 0, flagsSeen: 0 };
        shared!.summarise(outputs, n, into);
        expectSame(into, extremes(js, 0, n));
      }),
    );
    const elsewhere = { positionM: new Float64Array(4), velocityMS: new Float64Array(4), level: new Float32Array(4), flags: new Uint8Array(4) };
    expect(shared!.holds(elsewhere)).toBe(false);
  });

  it('keep the first zero the loop meets, and NaN where nothing finite was seen', () => {
    for (const kernels of [wasmKernels([2], 16), createJsAxisKernels([2], 16)]) {
      fill(kernels, 0, { p: [3, 0, -0, 5], v: [-0, 0, -1, -0], l: [0, -0, 2, 3], f: [1, 0, 4, 0] });
      expectSame(extremes(kernels, 0, 4), { positionMinM: 0, positionMaxM: 5, velocityMinMS: -1, velocityMaxMS: -0, levelMin: 0, flagsSeen: 5 });
      fill(kernels, 0, { p: [Number.NaN, Infinity], v: [-Infinity, Number.NaN], l: [Number.NaN, Number.NaN], f: [0, 0] });
      expectSame(extremes(kernels, 0, 2), { positionMinM: Number.NaN, positionMaxM: Number.NaN, velocityMinMS: Number.NaN, velocityMaxMS: Number.NaN, levelMin: Number.NaN, flagsSeen: 0 });
    }
  });
});
