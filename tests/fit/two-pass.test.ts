// The two-pass gated fit that calibrate, replay and listen share. Invariants: a blocked beam (samples at the
// centre of the figure) pulls a one-pass fit but not the second pass, whose result is the fit of only the samples
// within the gate; any split of the samples into blocks gives the same result. The ellipse is invented.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createEllipseAccumulator, createQuadratureSynthesizer, createTwoPassFit } from '../../src/core/index.js';
import '../support/property-seed.js';

const ellipse = { offsetX: 120, offsetY: -80, amplitudeX: 9000, amplitudeY: 8200, phaseErrorRad: 0.07 };

/**
 * 4 fringes of motion with 0.2 % noise, then `blocked` samples while a beam is partly blocked: the figure shrinks
 * to 30 % of its radius about the same centre, over the same fringes.
 */
function capture(blocked: number) {
  const moving = 8192;
  const phase = new Float64Array(moving + blocked);
  for (let i = 0; i < phase.length; i++) phase[i] = (8 * Math.PI * i) / moving;
  const x = new Float64Array(moving + blocked);
  const y = new Float64Array(moving + blocked);
  createQuadratureSynthesizer({ ellipse, noiseRms: 0.002 * 9000, seed: 3 }).process(phase, x, y, moving);
  const dimmed = { ...ellipse, amplitudeX: 0.3 * ellipse.amplitudeX, amplitudeY: 0.3 * ellipse.amplitudeY };
  createQuadratureSynthesizer({ ellipse: dimmed, noiseRms: 0.002 * 9000, seed: 4 }).process(
    phase.subarray(moving), x.subarray(moving), y.subarray(moving), blocked);
  return { x, y, moving };
}

function runTwoPass(x: Float64Array, y: Float64Array, cuts: readonly number[], method?: 'heydemann' | 'hyper') {
  const fit = createTwoPassFit(method === undefined ? {} : { method });
  for (;;) {
    let start = 0;
    for (const cut of [...cuts, x.length]) {
      const end = Math.min(Math.max(cut, start), x.length);
      fit.add(x.subarray(start, end), y.subarray(start, end), end - start);
      start = end;
    }
    const result = fit.endPass();
    if (result !== null) return result;
  }
}

describe('two-pass gated fit', () => {
  it('ignores a blocked beam that pulls a one-pass fit, and equals the fit of the samples within the gate', () => {
    const { x, y, moving } = capture(4000);
    const one = createEllipseAccumulator();
    one.add(x, y, x.length);
    const pulled = one.solve();
    const result = runTwoPass(x, y, [], 'heydemann');
    expect(result.ok).toBe(true);
    if (!result.ok) return;
    // Only the moving samples lie within [0.5, 1.5] of the radius; the dimmed ones sit at 0.3.
    const only = createEllipseAccumulator();
    only.add(x, y, moving);
    const reference = only.solve();
    if (!reference.ok) throw new Error(reference.message);
    expect(result.samples).toBe(moving);
    expect(result.calibration.offsetX).toBeCloseTo(reference.calibration.offsetX, 6);
    expect(result.calibration.amplitudeY).toBeCloseTo(reference.calibration.amplitudeY, 6);
    expect(Math.abs(result.calibration.offsetX - ellipse.offsetX)).toBeLessThan(0.002 * 9000);
    // The one-pass fit either fails or lands far from the ellipse: the gate is what makes the difference.
    if (pulled.ok) expect(Math.abs(pulled.calibration.amplitudeX - ellipse.amplitudeX)).toBeGreaterThan(0.01 * 9000);
  });

  it('returns the first pass failure without a second pass', () => {
    const fit = createTwoPassFit();
    fit.add(new Float64Array(10), new Float64Array(10), 10);
    expect(fit.endPass()).toMatchObject({ ok: false, reason: 'too-few-samples' });
    expect(fit.pass).toBe(1);
  });

  it('gives the same result for any split of the samples into blocks', () => {
    const { x, y } = capture(500);
    const whole = runTwoPass(x, y, [], 'hyper');
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: x.length }), { maxLength: 6 }), (cuts) => {
        const split = runTwoPass(x, y, [...cuts].sort((a, b) => a - b), 'hyper');
        // The same samples in the same order: equal but for the rounding of sums split differently.
        expect(split.ok && whole.ok).toBe(true);
        if (!split.ok || !whole.ok) return;
        expect(split.samples).toBe(whole.samples);
        for (const key of ['offsetX', 'offsetY', 'amplitudeX', 'amplitudeY'] as const) {
          expect(Math.abs(split.calibration[key] - whole.calibration[key])).toBeLessThan(1e-9 * ellipse.amplitudeX);
        }
        expect(split.calibration.phaseErrorRad).toBeCloseTo(whole.calibration.phaseErrorRad, 12);
      }),
      { numRuns: 20 },
    );
  });

  it('uses the library default method, hyper, unless told otherwise', () => {
    const { x, y } = capture(0);
    const byDefault = runTwoPass(x, y, []);
    expect(byDefault).toEqual(runTwoPass(x, y, [], 'hyper'));
    expect(byDefault).not.toEqual(runTwoPass(x, y, [], 'heydemann'));
  });
});
