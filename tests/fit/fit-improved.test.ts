// Checks of the bias-reduced ellipse fits. Sources: Heydemann, Appl. Opt. 20(19), 1981 (published): model, conic
// and closed form; Taubin, IEEE TPAMI 13(11), 1991 (published) and Kanatani & Rangarajan, Comput. Stat. Data Anal.
// 55 (2011) (published; volume from memory): the Taubin and hyper normalisation matrices and the claim that hyper
// least squares has no second-order bias while the plain algebraic fit has; ml-matrix (third-party doc) solves the
// 6×6 generalized eigenproblems independently, built here from the samples rather than from moment sums.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { EigenvalueDecomposition, Matrix, inverse } from 'ml-matrix';
import {
  createCorrection,
  createEllipseAccumulator,
  createPeriodicErrorAnalyzer,
  createQuadratureSynthesizer,
  heydemannFromConic,
  OptionError,
  wrapPhase,
  type EllipseCalibration,
} from '../../src/core/index.js';
import { createEllipseFit, ELLIPSE_FIT_METHODS } from '../../src/core/index.js';

function ellipsePoints(ellipse: EllipseCalibration, count: number, startRad: number, spanRad: number, noiseRms = 0, seed = 1) {
  const phase = new Float64Array(count);
  for (let i = 0; i < count; i++) phase[i] = startRad + (spanRad * i) / count;
  const x = new Float64Array(count);
  const y = new Float64Array(count);
  createQuadratureSynthesizer({ ellipse, noiseRms, seed }).process(phase, x, y, count);
  return { phase, x, y };
}

function accumulate(x: Float64Array, y: Float64Array) {
  const accumulator = createEllipseAccumulator({ minCoverage: 0 });
  accumulator.add(x, y, x.length);
  return accumulator;
}

const realisticEllipse = (scale: number) =>
  fc.record({
    offsetX: fc.double({ min: -0.3, max: 0.3, noNaN: true }).map((v) => v * scale),
    offsetY: fc.double({ min: -0.3, max: 0.3, noNaN: true }).map((v) => v * scale),
    amplitudeX: fc.constant(scale),
    amplitudeY: fc.double({ min: 0.7, max: 1.4, noNaN: true }).map((v) => v * scale),
    phaseErrorRad: fc.double({ min: -0.3, max: 0.3, noNaN: true }),
  });

const TRUTH: EllipseCalibration = { offsetX: 0.08, offsetY: -0.05, amplitudeX: 1, amplitudeY: 0.92, phaseErrorRad: 0.06 };

describe('noise-free ellipses', () => {
  for (const method of ELLIPSE_FIT_METHODS) {
    it(`${method}: recovers the ellipse to 1e-9 on a whole fringe and on half a fringe, in counts and in unit floats`, () => {
      fc.assert(
        fc.property(realisticEllipse(12000), fc.double({ min: 0, max: 6.28, noNaN: true }), fc.constantFrom(1, 1e-4), fc.constantFrom(1, 0.5), (scaled, start, unit, span) => {
          const truth = { ...scaled, offsetX: scaled.offsetX * unit, offsetY: scaled.offsetY * unit, amplitudeX: scaled.amplitudeX * unit, amplitudeY: scaled.amplitudeY * unit };
          const { x, y } = ellipsePoints(truth, 400, start, 2 * Math.PI * span);
          const result = createEllipseFit({ method, minCoverage: 0 }).solve(accumulate(x, y));
          expect(result.ok).toBe(true);
          if (!result.ok) return;
          // Tolerance 1e-9 of the radius: rounding of degree-4 sums of 400 samples (the fit is exact in exact arithmetic).
          const c = result.calibration;
          const r = truth.amplitudeX;
          expect(Math.abs(c.offsetX - truth.offsetX)).toBeLessThan(1e-9 * r);
          expect(Math.abs(c.offsetY - truth.offsetY)).toBeLessThan(1e-9 * r);
          expect(Math.abs(c.amplitudeX - truth.amplitudeX)).toBeLessThan(1e-9 * r);
          expect(Math.abs(c.amplitudeY - truth.amplitudeY)).toBeLessThan(1e-9 * r);
          expect(Math.abs(c.phaseErrorRad - truth.phaseErrorRad)).toBeLessThan(1e-9);
          expect(result.residualRms).toBeLessThan(1e-6);
        }),
        { numRuns: 40, seed: 21 },
      );
    });
  }
});

describe("method 'heydemann'", () => {
  it('is the classic accumulator fit: same calibration, conic, residual and coverage', () => {
    const { x, y } = ellipsePoints({ offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 }, 5000, 0.3, 2 * Math.PI * 1.3, 300, 4);
    const accumulator = createEllipseAccumulator();
    accumulator.add(x, y, x.length);
    const classic = accumulator.solve();
    const ours = createEllipseFit({ method: 'heydemann' }).solve(accumulator);
    expect(classic.ok && ours.ok).toBe(true);
    if (!classic.ok || !ours.ok) return;
    // Same equations solved by Gaussian elimination there and Cholesky here: agreement to rounding.
    for (const key of ['offsetX', 'offsetY', 'amplitudeX', 'amplitudeY'] as const) {
      expect(Math.abs(ours.calibration[key] - classic.calibration[key])).toBeLessThan(1e-9 * 12000);
    }
    expect(ours.calibration.phaseErrorRad).toBeCloseTo(classic.calibration.phaseErrorRad, 11);
    for (const key of ['A', 'B', 'C', 'D', 'E'] as const) expect(ours.conic[key]).toBeCloseTo(classic.conic[key], 10);
    expect(ours.residualRms).toBeCloseTo(classic.residualRms, 12);
    expect(ours.coverage).toBe(classic.coverage);
    expect(ours.samples).toBe(classic.samples);
  });

  it("the closed form written out in the solver agrees with heydemannFromConic", () => {
    const { x, y } = ellipsePoints(TRUTH, 3000, 0, 2 * Math.PI, 0.02, 9);
    for (const method of ELLIPSE_FIT_METHODS) {
      const result = createEllipseFit({ method }).solve(accumulate(x, y));
      if (!result.ok) throw new Error(result.message);
      const h = heydemannFromConic(result.conic)!;
      const { centreX, centreY, scale } = result.frame;
      expect(result.calibration.offsetX).toBeCloseTo(centreX + scale * h.p, 12);
      expect(result.calibration.offsetY).toBeCloseTo(centreY + scale * h.q, 12);
      expect(result.calibration.amplitudeX).toBeCloseTo(scale * h.R, 12);
      expect(result.calibration.phaseErrorRad).toBeCloseTo(-h.alphaRad, 12);
    }
  });
});

describe('Taubin and hyper against ml-matrix on the 6×6 generalized eigenproblem', () => {
  // Built from the samples: ξ = (a², b², ab, a, b, 1) in the fit's conditioned frame; M = mean ξξᵀ;
  // N_T = mean(∂ξ/∂a ∂ξ/∂aᵀ + ∂ξ/∂b ∂ξ/∂bᵀ) (Taubin 1991); N_H = N_T + ξ̄eᵀ + eξ̄ᵀ, e = (1, 1, 0, 0, 0, 0)
  // (Kanatani & Rangarajan 2011, without their O(1/n) terms). θ: eigenvector of M⁻¹N with the largest |μ|.
  for (const method of ['taubin', 'hyper'] as const) {
    it(`${method}: same conic as the dense reference, on noisy arcs`, () => {
      for (const [span, noise, seed] of [[1, 0.02, 3], [0.6, 0.03, 5], [0.8, 0.01, 8]] as const) {
        const { x, y } = ellipsePoints(TRUTH, 2000, 0.7, 2 * Math.PI * span, noise, seed);
        const result = createEllipseFit({ method, minCoverage: 0 }).solve(accumulate(x, y));
        if (!result.ok) throw new Error(result.message);
        const { centreX, centreY, scale } = result.frame;
        const M = Matrix.zeros(6, 6);
        const N = Matrix.zeros(6, 6);
        const mean = new Array<number>(6).fill(0);
        const n = x.length;
        for (let i = 0; i < n; i++) {
          const a = (x[i]! - centreX) / scale;
          const b = (y[i]! - centreY) / scale;
          const xi = [a * a, b * b, a * b, a, b, 1];
          const ga = [2 * a, 0, b, 1, 0, 0];
          const gb = [0, 2 * b, a, 0, 1, 0];
          for (let r = 0; r < 6; r++) {
            mean[r]! += xi[r]! / n;
            for (let c = 0; c < 6; c++) {
              M.set(r, c, M.get(r, c) + (xi[r]! * xi[c]!) / n);
              N.set(r, c, N.get(r, c) + (ga[r]! * ga[c]! + gb[r]! * gb[c]!) / n);
            }
          }
        }
        if (method === 'hyper') {
          const e = [1, 1, 0, 0, 0, 0];
          for (let r = 0; r < 6; r++) for (let c = 0; c < 6; c++) N.set(r, c, N.get(r, c) + mean[r]! * e[c]! + e[r]! * mean[c]!);
        }
        const decomposition = new EigenvalueDecomposition(inverse(M).mmul(N));
        const mu = decomposition.realEigenvalues;
        let best = 0;
        for (let k = 1; k < 6; k++) if (Math.abs(mu[k]!) > Math.abs(mu[best]!)) best = k;
        const theta = decomposition.eigenvectorMatrix.getColumn(best);
        const F = theta[5]!;
        const reference = theta.slice(0, 5).map((value) => value / -F);
        // Tolerance 1e-8: two independent double-precision solves of a well-conditioned 6×6 problem.
        const ours = [result.conic.A, result.conic.B, result.conic.C, result.conic.D, result.conic.E];
        for (let k = 0; k < 5; k++) expect(Math.abs(ours[k]! - reference[k]!)).toBeLessThan(1e-8);
      }
    });
  }
});

describe('bias under noise (fixed seeds, deterministic)', () => {
  /** Mean error of each parameter over trials, and the mean first-harmonic periodic error the calibration leaves. */
  function monteCarlo(spanFringes: number, noise: number, trials: number, samples: number) {
    const fits = { heydemann: createEllipseFit({ method: 'heydemann', minCoverage: 0 }), hyper: createEllipseFit({ method: 'hyper', minCoverage: 0 }) };
    const stats = {
      heydemann: { offsetX: 0, offsetY: 0, amplitudeX: 0, amplitudeY: 0, periodic: 0 },
      hyper: { offsetX: 0, offsetY: 0, amplitudeX: 0, amplitudeY: 0, periodic: 0 },
    };
    const clean = ellipsePoints(TRUTH, 720, 0, 2 * Math.PI);
    const u = new Float64Array(720);
    const v = new Float64Array(720);
    const error = new Float64Array(720);
    for (let trial = 0; trial < trials; trial++) {
      const { x, y } = ellipsePoints(TRUTH, samples, 0.4, 2 * Math.PI * spanFringes, noise, 100 + trial);
      const accumulator = accumulate(x, y);
      for (const method of ['heydemann', 'hyper'] as const) {
        const result = fits[method].solve(accumulator);
        if (!result.ok) throw new Error(result.message);
        const s = stats[method];
        for (const key of ['offsetX', 'offsetY', 'amplitudeX', 'amplitudeY'] as const) s[key] += (result.calibration[key] - TRUTH[key]) / trials;
        createCorrection({ calibration: result.calibration }).process(clean.x, clean.y, u, v, 720);
        for (let i = 0; i < 720; i++) error[i] = wrapPhase(Math.atan2(v[i]!, u[i]!) - clean.phase[i]!);
        const analyzer = createPeriodicErrorAnalyzer();
        analyzer.add(clean.phase, error, 720);
        s.periodic += analyzer.summary().firstHarmonicRad / trials;
      }
    }
    return stats;
  }

  it('whole fringe, 3 % noise: the radius bias of the classic fit (≈ σ²-sized) is removed by hyper', () => {
    const { heydemann, hyper } = monteCarlo(1, 0.03, 40, 20_000);
    // Expected classic bias is of order σ²·(a few) = 3e-3 (measured 2.6e-3 in bench/accuracy over 300 seeds);
    // hyper's residual bias is ~1e-5, under its scatter of 6e-5 over 40 seeds: a margin of 10× leaves room.
    expect(heydemann.amplitudeX).toBeGreaterThan(1.5e-3);
    expect(heydemann.amplitudeY).toBeGreaterThan(1.5e-3);
    expect(Math.abs(hyper.amplitudeX)).toBeLessThan(0.1 * heydemann.amplitudeX);
    expect(Math.abs(hyper.amplitudeY)).toBeLessThan(0.1 * heydemann.amplitudeY);
  });

  it('half a fringe, 3 % noise: hyper has a much smaller centre bias and leaves a smaller periodic error', () => {
    const { heydemann, hyper } = monteCarlo(0.5, 0.03, 40, 20_000);
    const classicCentre = Math.hypot(heydemann.offsetX, heydemann.offsetY);
    const hyperCentre = Math.hypot(hyper.offsetX, hyper.offsetY);
    // Classic: ≈ 7e-3 of the radius (bench, 300 seeds); hyper: within its 40-seed scatter of ≈ 5e-4.
    expect(classicCentre).toBeGreaterThan(4e-3);
    expect(hyperCentre).toBeLessThan(0.3 * classicCentre);
    // Once-per-fringe error left by the calibration: bench measures 8.0e-3 vs 2.6e-3 rad.
    expect(hyper.periodic).toBeLessThan(0.6 * heydemann.periodic);
  });
});

describe('failures and options', () => {
  it('reports the classic failure reasons', () => {
    const fit = createEllipseFit({ method: 'hyper' });
    const few = ellipsePoints(TRUTH, 10, 0, 2 * Math.PI);
    expect(fit.solve(accumulate(few.x, few.y))).toMatchObject({ ok: false, reason: 'too-few-samples' });
    const line = Float64Array.from({ length: 100 }, (_, i) => i / 100);
    expect(fit.solve(accumulate(line, line))).toMatchObject({ ok: false, reason: 'degenerate' });
    const quarter = ellipsePoints(TRUTH, 500, 0, Math.PI / 2);
    const result = fit.solve(accumulate(quarter.x, quarter.y));
    expect(result).toMatchObject({ ok: false, reason: 'low-coverage' });
    // A quarter fringe: 9 of the 36 bins, read high by up to a bin at each end (see coverageOfFit).
    expect(result.coverage).toBeGreaterThanOrEqual(0.25);
    expect(result.coverage).toBeLessThanOrEqual(0.25 + 2.01 / 36);
  });

  it('rejects invalid options naming the option, the rule and the value', () => {
    const cases: [Record<string, unknown>, string][] = [
      [{ method: 'fitzgibbon' }, 'method must be one of "heydemann", "taubin", "hyper" (got "fitzgibbon")'],
      [{ minCoverage: 2 }, 'minCoverage must be a number in [0, 1] (got 2)'],
      [{ minSamples: 3 }, 'minSamples must be an integer in 6..9007199254740991 (got 3)'],
      [{ maxAmplitudeRatio: 0.5 }, 'maxAmplitudeRatio must be a number in [1, 100] (got 0.5)'],
      [{ maxPhaseErrorRad: 2 }, 'maxPhaseErrorRad must be a number in (0, 1.5707963267948966] (got 2)'],
    ];
    for (const [options, message] of cases) {
      expect(() => createEllipseFit(options as never)).toThrow(OptionError);
      expect(() => createEllipseFit(options as never)).toThrow(message);
    }
    expect(createEllipseFit().method).toBe('hyper');
  });
});
