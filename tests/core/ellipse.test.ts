// Checks of the Heydemann fit. Sources: P. L. M. Heydemann, Appl. Opt. 20(19), 3382-3384 (1981) (published):
// model, conic, closed form and correction; ml-matrix (third-party general-purpose linear algebra) as an
// independent least-squares solver; small-error sizes derived from the model (docs/references.md).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { Matrix, solve as mlSolve } from 'ml-matrix';
import {
  createEllipseAccumulator,
  createQuadratureSynthesizer,
  fastAtan2,
  fromHeydemann,
  heydemannFromConic,
  toHeydemann,
  type EllipseCalibration,
} from '../../src/core/index.js';

function ellipsePoints(ellipse: EllipseCalibration, count: number, startRad = 0, spanRad = 2 * Math.PI, noiseRms = 0, seed = 1) {
  const phase = new Float64Array(count);
  for (let i = 0; i < count; i++) phase[i] = startRad + (spanRad * i) / count;
  const x = new Float64Array(count);
  const y = new Float64Array(count);
  createQuadratureSynthesizer({ ellipse, noiseRms, seed }).process(phase, x, y, count);
  return { phase, x, y };
}

const realisticEllipse = (scale: number) =>
  fc.record({
    offsetX: fc.double({ min: -0.3, max: 0.3, noNaN: true }).map((v) => v * scale),
    offsetY: fc.double({ min: -0.3, max: 0.3, noNaN: true }).map((v) => v * scale),
    amplitudeX: fc.constant(scale),
    amplitudeY: fc.double({ min: 0.7, max: 1.4, noNaN: true }).map((v) => v * scale),
    phaseErrorRad: fc.double({ min: -0.3, max: 0.3, noNaN: true }),
  });

function expectCalibrationClose(fitted: EllipseCalibration, truth: EllipseCalibration, relative: number) {
  const scale = truth.amplitudeX;
  expect(Math.abs(fitted.offsetX - truth.offsetX)).toBeLessThanOrEqual(relative * scale);
  expect(Math.abs(fitted.offsetY - truth.offsetY)).toBeLessThanOrEqual(relative * scale);
  expect(Math.abs(fitted.amplitudeX - truth.amplitudeX)).toBeLessThanOrEqual(relative * truth.amplitudeX);
  expect(Math.abs(fitted.amplitudeY - truth.amplitudeY)).toBeLessThanOrEqual(relative * truth.amplitudeY);
  expect(Math.abs(fitted.phaseErrorRad - truth.phaseErrorRad)).toBeLessThanOrEqual(relative);
}

describe('convention and Heydemann symbols', () => {
  it("maps Heydemann's x = R cos δ + p, y = (R/G) sin(δ − α) + q onto x = aX cos φ + oX, y = aY sin(φ + e) + oY", () => {
    const h = { p: 0.12, q: -0.05, R: 1.3, G: 1.1, alphaRad: 0.07 };
    const c = fromHeydemann(h);
    expect(c).toEqual({ offsetX: 0.12, offsetY: -0.05, amplitudeX: 1.3, amplitudeY: 1.3 / 1.1, phaseErrorRad: -0.07 });
    for (let k = 0; k < 16; k++) {
      const delta = (k * 2 * Math.PI) / 16;
      const heydemannX = h.R * Math.cos(delta) + h.p;
      const heydemannY = (h.R / h.G) * Math.sin(delta - h.alphaRad) + h.q;
      expect(c.amplitudeX * Math.cos(delta) + c.offsetX).toBeCloseTo(heydemannX, 14);
      expect(c.amplitudeY * Math.sin(delta + c.phaseErrorRad) + c.offsetY).toBeCloseTo(heydemannY, 14);
    }
    const back = toHeydemann(c);
    expect(back.p).toBe(h.p);
    expect(back.G).toBeCloseTo(h.G, 14);
    expect(back.alphaRad).toBe(h.alphaRad);
  });

  it("recovers p, q, R, G, α from the conic by Heydemann's closed form", () => {
    // Expanding the model: X² + G²Y² + 2G sinα XY = R² cos²α with X = x − p, Y = y − q, scaled so the
    // constant side is 1, gives the conic A x² + B y² + C xy + D x + E y = 1.
    const h = { p: 0.31, q: -0.22, R: 2.5, G: 0.85, alphaRad: -0.2 };
    const s = 2 * h.G * Math.sin(h.alphaRad);
    const g2 = h.G * h.G;
    const constant = h.R * h.R * Math.cos(h.alphaRad) ** 2 - (h.p * h.p + g2 * h.q * h.q + s * h.p * h.q);
    const conic = {
      A: 1 / constant,
      B: g2 / constant,
      C: s / constant,
      D: (-2 * h.p - s * h.q) / constant,
      E: (-2 * g2 * h.q - s * h.p) / constant,
    };
    const recovered = heydemannFromConic(conic)!;
    expect(recovered.p).toBeCloseTo(h.p, 12);
    expect(recovered.q).toBeCloseTo(h.q, 12);
    expect(recovered.R).toBeCloseTo(h.R, 12);
    expect(recovered.G).toBeCloseTo(h.G, 12);
    expect(recovered.alphaRad).toBeCloseTo(h.alphaRad, 12);
    expect(heydemannFromConic({ A: 1, B: -1, C: 0, D: 0, E: 0 })).toBeNull(); // a hyperbola
    expect(heydemannFromConic({ A: 1, B: 1, C: 3, D: 0, E: 0 })).toBeNull(); // 4AB − C² < 0
  });
});

describe('ellipse fit', () => {
  it('recovers realistic noise-free ellipses to about 1e-9 relative, at unit scale and at int16 counts', () => {
    for (const scale of [1, 12000]) {
      fc.assert(
        fc.property(realisticEllipse(scale), fc.double({ min: 0, max: 6.28, noNaN: true }), (truth, start) => {
          const { x, y } = ellipsePoints(truth, 720, start);
          const fit = createEllipseAccumulator();
          fit.add(x, y, x.length);
          const result = fit.solve();
          expect(result.ok).toBe(true);
          if (!result.ok) return;
          expectCalibrationClose(result.calibration, truth, 1e-9);
          expect(result.coverage).toBeGreaterThan(0.99);
          expect(result.residualRms).toBeLessThan(1e-6);
        }),
        { numRuns: 60 },
      );
    }
  });

  it('solves the same least-squares problem as ml-matrix (independent QR solver) on noisy samples', () => {
    const truth = { offsetX: 800, offsetY: -1500, amplitudeX: 11000, amplitudeY: 9800, phaseErrorRad: 0.12 };
    const { x, y } = ellipsePoints(truth, 3000, 0.4, 2.6 * Math.PI, 150, 7);
    const fit = createEllipseAccumulator();
    fit.add(x, y, x.length);
    const result = fit.solve();
    if (!result.ok) throw new Error(result.message);
    const { centreX, centreY, scale } = result.frame;
    const rows: number[][] = [];
    for (let i = 0; i < x.length; i++) {
      const a = (x[i]! - centreX) / scale;
      const b = (y[i]! - centreY) / scale;
      rows.push([a * a, b * b, a * b, a, b]);
    }
    const reference = mlSolve(new Matrix(rows), Matrix.columnVector(new Array(x.length).fill(1))).to1DArray();
    const ours = [result.conic.A, result.conic.B, result.conic.C, result.conic.D, result.conic.E];
    for (let k = 0; k < 5; k++) expect(Math.abs(ours[k]! - reference[k]!)).toBeLessThan(1e-9 * Math.max(1, Math.abs(reference[k]!)));
  });

  it('merges accumulators exactly: two halves give the fit of the whole', () => {
    const truth = { offsetX: 0.1, offsetY: 0.05, amplitudeX: 1, amplitudeY: 0.9, phaseErrorRad: 0.05 };
    const { x, y } = ellipsePoints(truth, 1000, 0, 2 * Math.PI, 0.01, 3);
    const whole = createEllipseAccumulator();
    whole.add(x, y, 1000);
    const first = createEllipseAccumulator();
    const second = createEllipseAccumulator();
    first.add(x.subarray(0, 400), y.subarray(0, 400), 400);
    second.add(x.subarray(400), y.subarray(400), 600);
    first.merge(second);
    const a = whole.solve();
    const b = first.solve();
    if (!a.ok || !b.ok) throw new Error('fit failed');
    expectCalibrationClose(b.calibration, a.calibration, 1e-11);
  });

  it('reports the residual relative to the radius: radial noise σ/R (common practice estimate)', () => {
    const truth = { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 };
    const { x, y } = ellipsePoints(truth, 20000, 0, 20 * Math.PI, 0.01, 11);
    const fit = createEllipseAccumulator();
    fit.add(x, y, x.length);
    const result = fit.solve();
    if (!result.ok) throw new Error(result.message);
    expect(result.residualRms).toBeGreaterThan(0.009);
    expect(result.residualRms).toBeLessThan(0.011);
  });

  it('measures coverage as the share of 10° phase bins reached, blind to dwelling', () => {
    const truth = { offsetX: 0.2, offsetY: -0.1, amplitudeX: 1, amplitudeY: 1.1, phaseErrorRad: 0.1 };
    const bin = 1 / 36;
    const coverageOf = (span: number) => {
      const { x, y } = ellipsePoints(truth, 4000, 1, span);
      const fit = createEllipseAccumulator({ minCoverage: 0 });
      fit.add(x, y, x.length);
      return fit.solve().coverage;
    };
    expect(coverageOf(2 * Math.PI)).toBe(1);
    expect(Math.abs(coverageOf(1.5 * Math.PI) - 0.75)).toBeLessThanOrEqual(2.01 * bin);
    expect(Math.abs(coverageOf(Math.PI) - 0.5)).toBeLessThanOrEqual(2.01 * bin);
    // Two opposite quarter arcs cover half the bins, read high by up to a bin at each of their four ends.
    const a = ellipsePoints(truth, 2000, 0, Math.PI / 2);
    const b = ellipsePoints(truth, 2000, Math.PI, Math.PI / 2);
    const fit = createEllipseAccumulator({ minCoverage: 0 });
    fit.add(a.x, a.y, 2000);
    fit.add(b.x, b.y, 2000);
    expect(fit.solve().coverage - 0.5).toBeGreaterThanOrEqual(0);
    expect(fit.solve().coverage - 0.5).toBeLessThanOrEqual(4.01 * bin);
    // A stage that dwells for 90 % of the capture at one phase, with noise, and moves one fringe.
    const dwell = ellipsePoints(truth, 36_000, 0.3, 0, 0.002, 5);
    const move = ellipsePoints(truth, 4000, 0.3, 2 * Math.PI, 0.002, 6);
    const dwelling = createEllipseAccumulator();
    dwelling.add(dwell.x, dwell.y, 18_000);
    dwelling.add(move.x, move.y, 4000);
    dwelling.add(dwell.x.subarray(18_000), dwell.y.subarray(18_000), 18_000);
    expect(dwelling.solve()).toMatchObject({ ok: true, coverage: 1 });
  });

  it('reads a whole fringe as full coverage, and a partial arc never low, for any ellipse within the limits', () => {
    // The grid can be coarser than a 10° bin on a flat ellipse: every bin the figure passed through must
    // still count (a full fringe must not be refused), and the over-count stays below one cell at each end.
    const bin = 1 / 36;
    const plausibleEllipse = fc.record({
      offsetX: fc.double({ min: -0.5, max: 0.5, noNaN: true }),
      offsetY: fc.double({ min: -0.5, max: 0.5, noNaN: true }),
      amplitudeX: fc.constant(1),
      amplitudeY: fc.double({ min: -Math.log(3.9), max: Math.log(3.9), noNaN: true }).map(Math.exp),
      phaseErrorRad: fc.double({ min: -0.75, max: 0.75, noNaN: true }),
    });
    fc.assert(
      fc.property(plausibleEllipse, fc.double({ min: 0, max: 6.3, noNaN: true }), fc.double({ min: 0.3, max: 1.2, noNaN: true }), (truth, start, turns) => {
        const { x, y } = ellipsePoints(truth, 1500, start, turns * 2 * Math.PI);
        const fit = createEllipseAccumulator({ minCoverage: 0 });
        fit.add(x, y, x.length);
        const result = fit.solve();
        expect(result.ok).toBe(true);
        // The points span (count − 1)/count of the arc asked for: ellipsePoints leaves out its end point.
        const reached = Math.min(1, (turns * (x.length - 1)) / x.length);
        expect(result.coverage).toBeGreaterThanOrEqual(reached - 1e-12);
        expect(result.coverage).toBeLessThanOrEqual(reached + 5 * bin);
        if (turns >= 1) expect(result.coverage).toBe(1);
      }),
      { numRuns: 200 },
    );
  });

  it('reads full coverage for a whole fringe split between two merged accumulators, whatever their grids', () => {
    // Each part zooms its own grid; merging maps one grid's cells into the other's, coarser or finer.
    fc.assert(
      fc.property(
        fc.double({ min: -Math.log(3.9), max: Math.log(3.9), noNaN: true }).map(Math.exp),
        fc.double({ min: -0.75, max: 0.75, noNaN: true }),
        fc.double({ min: 0, max: 6.3, noNaN: true }),
        fc.double({ min: 0.05, max: 0.95, noNaN: true }),
        (ratio, phaseErrorRad, start, split) => {
          const truth = { offsetX: 0.2, offsetY: -0.3, amplitudeX: 1, amplitudeY: ratio, phaseErrorRad };
          const first = ellipsePoints(truth, 1500, start, split * 2 * Math.PI);
          const second = ellipsePoints(truth, 1500, start + split * 2 * Math.PI, (1 - split) * 2 * Math.PI);
          const merged = createEllipseAccumulator({ minCoverage: 0 });
          merged.add(first.x, first.y, 1500);
          const other = createEllipseAccumulator({ minCoverage: 0 });
          other.add(second.x, second.y, 1500);
          merged.merge(other);
          expect(merged.solve()).toMatchObject({ ok: true, coverage: 1 });
        },
      ),
      { numRuns: 100 },
    );
  });

  it('refuses too little coverage, with the coverage in the reason', () => {
    const truth = { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 };
    const { x, y } = ellipsePoints(truth, 500, 0, Math.PI, 0.001);
    const fit = createEllipseAccumulator();
    fit.add(x, y, x.length);
    const result = fit.solve();
    expect(result.ok).toBe(false);
    if (result.ok) return;
    expect(result.reason).toBe('low-coverage');
    expect(result.message).toMatch(/phase coverage 0\.5\d\d of a fringe is below the minimum 0\.75/);
    expect(result.coverage).toBeLessThan(0.56);
  });

  it('rejects non-ellipse and degenerate data with a specific reason', () => {
    const line = createEllipseAccumulator();
    const t = Float64Array.from({ length: 100 }, (_, i) => i);
    line.add(t, t, 100);
    expect(line.solve()).toMatchObject({ ok: false, reason: 'degenerate' });

    const hyperbola = createEllipseAccumulator({ minCoverage: 0 });
    const hx = Float64Array.from({ length: 200 }, (_, i) => Math.cosh(-2 + i / 50));
    const hy = Float64Array.from({ length: 200 }, (_, i) => Math.sinh(-2 + i / 50));
    hyperbola.add(hx, hy, 200);
    expect(hyperbola.solve()).toMatchObject({ ok: false, reason: 'not-an-ellipse' });

    const few = createEllipseAccumulator();
    few.add([1, 2, 3], [3, 1, 2], 3);
    expect(few.solve()).toMatchObject({ ok: false, reason: 'too-few-samples' });

    const flat = ellipsePoints({ offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 0.1, phaseErrorRad: 0 }, 400);
    const implausible = createEllipseAccumulator();
    implausible.add(flat.x, flat.y, 400);
    expect(implausible.solve()).toMatchObject({ ok: false, reason: 'implausible' });
  });

  it('skips and counts non-finite samples', () => {
    const fit = createEllipseAccumulator();
    const { x, y } = ellipsePoints({ offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 }, 100);
    x[5] = Number.NaN;
    y[9] = Number.POSITIVE_INFINITY;
    fit.add(x, y, 100);
    expect(fit.samples).toBe(98);
    expect(fit.skippedNonFinite).toBe(2);
    expect(fit.solve().ok).toBe(true);
  });

  it('rejects bad options naming the option, the rule and the value', () => {
    expect(() => createEllipseAccumulator({ minCoverage: 2 })).toThrow('minCoverage must be a number in [0, 1] (got 2)');
    expect(() => createEllipseAccumulator({ minSamples: 2 })).toThrow(/minSamples must be an integer in 6\.\./);
  });
});

describe('uncorrected periodic error sizes (derived from the model, docs/references.md)', () => {
  /** Amplitude of harmonic k of the phase error atan2(y, x) − φ over one fringe (DFT). */
  function harmonicAmplitude(ellipse: EllipseCalibration, k: number): number {
    const n = 4096;
    const { phase, x, y } = ellipsePoints(ellipse, n);
    let re = 0;
    let im = 0;
    for (let i = 0; i < n; i++) {
      let error = fastAtan2(y[i]!, x[i]!) - phase[i]!;
      error -= 2 * Math.PI * Math.round(error / (2 * Math.PI));
      re += error * Math.cos(k * phase[i]!);
      im += error * Math.sin(k * phase[i]!);
    }
    return (2 / n) * Math.hypot(re, im);
  }
  const epsilon = 0.01;
  const circle = { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 };

  it('an offset of ε·R gives a once-per-fringe error of amplitude ε rad', () => {
    expect(harmonicAmplitude({ ...circle, offsetX: epsilon }, 1)).toBeCloseTo(epsilon, 4);
  });
  it('a gain mismatch G = 1 + ε gives a twice-per-fringe error of amplitude ε/2 rad', () => {
    expect(harmonicAmplitude({ ...circle, amplitudeY: 1 / (1 + epsilon) }, 2)).toBeCloseTo(epsilon / 2, 4);
  });
  it('a quadrature error α gives a twice-per-fringe error of amplitude α/2 rad', () => {
    expect(harmonicAmplitude({ ...circle, phaseErrorRad: epsilon }, 2)).toBeCloseTo(epsilon / 2, 4);
  });
});
