// The two-pass gated fit that calibrate, replay and listen share. Invariants: a blocked beam (samples at the
// centre of the figure) pulls a one-pass fit but not the second pass, whose result is the fit of only the samples
// within the gate; any split of the samples into blocks gives the same result. The ellipse is invented.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createDetectorFit, createEllipseAccumulator, createQuadratureSynthesizer, createTwoPassFit, wrapPhase } from '../../src/core/index.js';
import { detectorOutputs, FOUR_OUTPUTS, UNBALANCED_THREE, wanderingPhase } from '../support/detector-outputs.js';
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

describe('detector fit (2, 3 or 4 outputs; calibrate and listen)', () => {
  /** Feeds the outputs split at `cuts` once per pass until the fit ends. */
  function runDetector(channels: readonly Float64Array[], cuts: readonly number[]) {
    const fit = createDetectorFit({ channelCount: channels.length });
    const n = channels[0]!.length;
    for (;;) {
      let start = 0;
      for (const cut of [...cuts, n]) {
        const end = Math.min(Math.max(cut, start), n);
        fit.add(channels.map((channel) => channel.subarray(start, end)), end - start);
        start = end;
      }
      const result = fit.endPass();
      if (result !== null) return result;
    }
  }

  it('is the two-pass fit itself for a pair', () => {
    const { x, y } = capture(500);
    const pair = runDetector([x, y], [1000, 4097]);
    expect(pair).toEqual(runTwoPass(x, y, [1000, 4097]));
    expect(pair.ok && pair.channels).toBe(undefined);
  });

  it('recovers every output of three and four under a drifting source with a blocked beam, and the gate keeps the beam out', () => {
    // Invented layouts (tests/support/detector-outputs.ts); 30 fringes of wandering motion, source power +4 % over
    // the record, then 3000 samples with the beam mostly blocked (every output near its offset·P: the pair's radius
    // about 0.2), which the second pass leaves out.
    const n = 20_000;
    const blocked = 3000;
    const phase = wanderingPhase(n + blocked, 30);
    for (const layout of [UNBALANCED_THREE, FOUR_OUTPUTS]) {
      const dimmed = layout.map((channel) => ({ ...channel, amplitude: 0.2 * channel.amplitude }));
      const moving = detectorOutputs(layout, phase.subarray(0, n), { power: (i) => 1 + (0.04 * i) / n, noiseRms: 1e-4 });
      const dark = detectorOutputs(dimmed, phase.subarray(n), { power: () => 1.04, noiseRms: 1e-4, seed: 2 });
      const channels = moving.channels.map((channel, k) => Float64Array.from([...channel, ...dark.channels[k]!]));
      const result = runDetector(channels, []);
      expect(result.ok).toBe(true);
      if (!result.ok) return;
      expect(result.samples).toBe(n);
      // Offsets and gains at the mean power over the fitted samples (the blocked ones take part in the power pass).
      const meanPower = [...moving.power, ...dark.power].reduce((sum, p) => sum + p, 0) / (n + blocked);
      result.channels!.forEach((channel, k) => {
        expect(channel.offset / (layout[k]!.offset * meanPower)).toBeCloseTo(1, 2);
        expect(channel.amplitude / (layout[k]!.amplitude * meanPower)).toBeCloseTo(1, 2);
        expect(Math.abs(wrapPhase(channel.phaseRad - layout[k]!.phaseRad))).toBeLessThan(5e-3);
      });
      // Any split into blocks gives the same outputs but for the rounding of sums split differently.
      fc.assert(
        fc.property(fc.array(fc.integer({ min: 0, max: n + blocked }), { maxLength: 5 }), (cuts) => {
          const split = runDetector(channels, [...cuts].sort((a, b) => a - b));
          expect(split.ok && split.samples).toBe(n);
          if (!split.ok) return;
          split.channels!.forEach((channel, k) => {
            expect(Math.abs(channel.offset - result.channels![k]!.offset)).toBeLessThan(1e-9);
            expect(Math.abs(channel.phaseRad - result.channels![k]!.phaseRad)).toBeLessThan(1e-9);
          });
        }),
        { numRuns: 10 },
      );
    }
  });

  it('refuses outputs without a steady power combination in the power pass, before any ellipse pass', () => {
    const n = 4000;
    // AC-coupled outputs (no offsets): nothing combines into a steady power.
    const { channels } = detectorOutputs(UNBALANCED_THREE.map((channel) => ({ ...channel, offset: 0 })), wanderingPhase(n, 10), { noiseRms: 1e-3 });
    const fit = createDetectorFit({ channelCount: 3 });
    expect(fit.pass).toBe(0);
    fit.add(channels, n);
    expect(fit.endPass()).toMatchObject({ ok: false, reason: 'degenerate' });
    expect(() => fit.add(channels.slice(0, 2), n)).toThrow(/channels must be 3 sample arrays/);
    expect(() => createDetectorFit({ channelCount: 5 })).toThrow(/channelCount must be an integer in 2\.\.4/);
  });
});
