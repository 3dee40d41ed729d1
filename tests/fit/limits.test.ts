// The acceptance limits every fit method applies. Check values: the real three-output recording (MiniPTI
// data, MIT licence, see docs/references.md) gave a valid pair with quadrature error −53° and amplitude ratio 1.45 that
// a fixed ±45° limit refused; the correction's phase-noise gain 1/cos e is Heydemann's model (Appl. Opt. 20(19),
// 1981: y is divided by cos α), so 70° means 2.9×. The ellipses themselves are invented.
import { describe, expect, it } from 'vitest';
import { createEllipseAccumulator, createEllipseFit, createQuadratureSynthesizer, ELLIPSE_FIT_METHODS, OptionError } from '../../src/core/index.js';

function fitOf(phaseErrorDeg: number, ratio: number, options: Parameters<typeof createEllipseFit>[0] = {}) {
  const ellipse = { offsetX: 0.02, offsetY: -0.01, amplitudeX: 1, amplitudeY: 1 / ratio, phaseErrorRad: (phaseErrorDeg * Math.PI) / 180 };
  const count = 4096;
  const phase = Float64Array.from({ length: count }, (_, i) => (4 * Math.PI * i) / count);
  const x = new Float64Array(count);
  const y = new Float64Array(count);
  createQuadratureSynthesizer({ ellipse, noiseRms: 0.002, seed: 5 }).process(phase, x, y, count);
  const accumulator = createEllipseAccumulator();
  accumulator.add(x, y, count);
  return createEllipseFit(options).solve(accumulator);
}

describe('fit acceptance limits', () => {
  it('accepts the real recording\'s −53° and 1:1.45 pair, and up to ±70° and 1:4 by default, with every method', () => {
    for (const method of ELLIPSE_FIT_METHODS) {
      const real = fitOf(-53, 1.45, { method });
      expect(real.ok).toBe(true);
      if (real.ok) expect((real.calibration.phaseErrorRad * 180) / Math.PI).toBeCloseTo(-53, 0);
      expect(fitOf(69, 1, { method }).ok).toBe(true);
      expect(fitOf(10, 3.9, { method }).ok).toBe(true);
    }
  });

  it('refuses beyond the limits, and the options move them', () => {
    expect(fitOf(74, 1)).toMatchObject({ ok: false, reason: 'implausible' });
    expect(fitOf(74, 1, { maxPhaseErrorRad: (80 * Math.PI) / 180 }).ok).toBe(true);
    expect(fitOf(-53, 1.45, { maxPhaseErrorRad: Math.PI / 4 })).toMatchObject({ ok: false, reason: 'implausible' });
    expect(fitOf(0, 4.5)).toMatchObject({ ok: false, reason: 'implausible' });
    expect(fitOf(0, 4.5, { maxAmplitudeRatio: 5 }).ok).toBe(true);
    expect(() => createEllipseFit({ maxAmplitudeRatio: 0.5 })).toThrow(OptionError);
  });
});
