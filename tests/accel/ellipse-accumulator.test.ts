// The WebAssembly accumulator (src/accel/ellipse-accumulator.ts) against the core's createEllipseAccumulator:
// after any sequence of adds (any block sizes, across the kernel's 4096-pair chunks), merges and resets, the same
// moment sums, coverage grid, shift and skipped count, bit for bit, and so the same fits. Samples are invented: an
// invented ellipse at drawn radii, with glitches that zoom the grid out and non-finite values.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createEllipseAccumulator, createTwoPassFit } from '../../src/core/index.js';
import { createFastEllipseAccumulator, createWasmEllipseAccumulator } from '../../src/accel/index.js';
import '../support/property-seed.js';
import { ellipseRuns, expectSameState, sometimesInt16 } from '../support/fit-accumulators.js';

const ellipse = { offsetX: 37, offsetY: -21, amplitudeX: 9000, amplitudeY: 7600, phaseErrorRad: 0.3 };

// Runs that cross the kernel's 4096-pair chunks; glitches that zoom the grid out; half the time as int16 arrays.
const pairs = sometimesInt16(ellipseRuns(ellipse, {
  radius: fc.oneof(fc.constant(0), fc.double({ min: 0, max: 1.6, noNaN: true })),
  glitches: [Number.NaN, Infinity, -Infinity, 3e5, -1e9, 0.25],
  maxRepeat: 3000,
  maxRuns: 40,
}));

type Samples = { x: Float64Array; y: Float64Array; fx: Float64Array | Int16Array; fy: Float64Array | Int16Array };
type Step = ({ kind: 'add' } & Samples) | ({ kind: 'merge' } & Samples) | { kind: 'reset' };
const steps = fc.array(
  fc.oneof(
    { weight: 6, arbitrary: pairs.map((p): Step => ({ kind: 'add', ...p })) },
    { weight: 1, arbitrary: pairs.map((p): Step => ({ kind: 'merge', ...p })) },
    { weight: 1, arbitrary: fc.constant<Step>({ kind: 'reset' }) },
  ),
  { minLength: 1, maxLength: 8 },
);

describe('WebAssembly ellipse accumulator', () => {
  const wasm = createWasmEllipseAccumulator();

  it('exists on this engine (WebAssembly SIMD), else the fast accumulator is the core one', () => {
    expect(wasm).not.toBeNull();
    expect(typeof createFastEllipseAccumulator().add).toBe('function');
  });

  it('keeps the core accumulator’s sums, grid, shift and counts to the bit after any adds, merges and resets', () => {
    fc.assert(
      fc.property(steps, (sequence) => {
        const fast = createWasmEllipseAccumulator()!;
        const core = createEllipseAccumulator();
        for (const step of sequence) {
          if (step.kind === 'reset') {
            fast.reset();
            core.reset();
          } else if (step.kind === 'add') {
            fast.add(step.fx, step.fy, step.x.length);
            core.add(step.x, step.y, step.x.length);
          } else {
            const other = createEllipseAccumulator();
            other.add(step.x, step.y, step.x.length);
            fast.merge(other);
            core.merge(other);
          }
          expectSameState(fast, core);
        }
        expect(fast.solve()).toEqual(core.solve());
      }),
      { numRuns: 150 },
    );
  });

  it('marks the grid’s edge cells as the core from int16 pairs (the cell tables)', () => {
    // The grid is 4000 wide after the pair at 1000 (twice its reach on either side): pairs at ±1999 take the first
    // and last row and column, then the one at 2000 zooms it out and those at ±3999 take the new edges.
    const x = Int16Array.of(0, 1000, 1999, -1999, 1999, -1999, 2000, 3999, -3999, 3998);
    const y = Int16Array.of(0, 0, 1999, -1999, -1999, 1999, 0, 3999, -3999, -3999);
    for (const split of [x.length, 3, 7]) {
      const fast = createWasmEllipseAccumulator()!;
      const core = createEllipseAccumulator();
      for (let start = 0; start < x.length; start += split) {
        const xs = x.subarray(start, start + split), ys = y.subarray(start, start + split);
        fast.add(xs, ys, xs.length);
        core.add(Float64Array.from(xs), Float64Array.from(ys), xs.length);
        expectSameState(fast, core);
      }
    }
  });

  it('gives the two-pass fit the core accumulator gives, for any block size', () => {
    const n = 20_000;
    const x64 = new Float64Array(n);
    const y64 = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const phase = (6 * Math.PI * i) / n;
      const radius = i > 15_000 && i < 16_000 ? 0.3 : 1 + 0.01 * Math.sin(i * 1.7);
      x64[i] = Math.round(ellipse.offsetX + ellipse.amplitudeX * radius * Math.cos(phase));
      y64[i] = Math.round(ellipse.offsetY + ellipse.amplitudeY * radius * Math.sin(phase + ellipse.phaseErrorRad));
    }
    const x16 = Int16Array.from(x64);
    const y16 = Int16Array.from(y64);
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 9000 }), (block) => {
        const run = (fit: ReturnType<typeof createTwoPassFit>, x: Float64Array | Int16Array = x64, y: Float64Array | Int16Array = y64) => {
          for (;;) {
            for (let start = 0; start < n; start += block) fit.add(x.subarray(start, start + block), y.subarray(start, start + block), Math.min(block, n - start));
            const result = fit.endPass();
            if (result !== null) return result;
          }
        };
        const core = run(createTwoPassFit());
        expect(core.ok).toBe(true);
        expect(run(createTwoPassFit({ createAccumulator: () => createWasmEllipseAccumulator()! }))).toEqual(core);
        // The same integers as int16 arrays (a capture's int16 blocks as stored).
        expect(run(createTwoPassFit({ createAccumulator: () => createWasmEllipseAccumulator()! }), x16, y16)).toEqual(core);
      }),
      { numRuns: 15 },
    );
  });
});
