// Bias-reduced ellipse fits from the same moment sums as the Heydemann fit (x^i y^j, i + j <= 4), so they
// work on an `EllipseAccumulator` with no stored samples:
//  - 'heydemann': least squares of A a² + B b² + C ab + D a + E b = 1 (Heydemann, Appl. Opt. 20(19), 1981);
//  - 'taubin': G. Taubin, IEEE TPAMI 13(11), 1115-1138 (1991): min θᵀMθ / θᵀN_Tθ, N_T the mean first-order
//    covariance of the monomials under isotropic noise (gradient-weighted normalisation);
//  - 'hyper': hyper least squares, K. Kanatani & P. Rangarajan, Comput. Stat. Data Anal. 55 (2011) (volume from
//    memory), after Al-Sharadqah & Chernov, Electron. J. Statist. 3 (2009): N_H = N_T + 2·S[ξ̄ eᵀ], which cancels
//    the second-order (σ²) bias of the algebraic fit. Their O(σ²/n) terms need per-sample products of degree 6
//    and are left out here; at the thousands of samples a calibration uses they are far below the bias removed.

import type { Conic, EllipseAccumulator, EllipseCalibration, EllipseFitOptions, EllipseFitResult } from './ellipse.js';
import { acceptFit, coverageOfFit, fromHeydemann, MOMENT_COUNT, momentIndex, resolveFitLimits, shiftMoments } from './ellipse.js';
import { choleskyInPlace, createGeneralizedEigenSolver } from './fit-numerics.js';
import { oneOf } from './options.js';

export const ELLIPSE_FIT_METHODS = ['heydemann', 'taubin', 'hyper'] as const;
export type EllipseFitMethod = (typeof ELLIPSE_FIT_METHODS)[number];

/** Exponents (i, j) of the five conic features a², b², ab, a, b. */
const FEATURE_I = [2, 0, 1, 1, 0];
const FEATURE_J = [0, 2, 1, 0, 1];

/**
 * The solved conic, in Heydemann's symbols in the conditioned frame a = (u − centreU)/scale, b = (v − centreV)/scale,
 * where (u, v) are the coordinates the moments were summed in. Reused between solves (no allocation).
 */
export interface ConicSolution {
  status: 'ok' | 'degenerate' | 'not-an-ellipse';
  /** The conic A a² + B b² + C ab + D a + E b = 1. */
  A: number;
  B: number;
  C: number;
  D: number;
  E: number;
  centreU: number;
  centreV: number;
  scale: number;
  /** Heydemann's p, q, R, G, α of the conic, in the conditioned frame. */
  p: number;
  q: number;
  R: number;
  G: number;
  alphaRad: number;
  /** RMS of (corrected radius − 1) over the summed samples, from the moments. */
  residualRms: number;
}

export interface ConicSolver {
  /** Solves from 15 moment sums (any positive weights); the result object is the solver's own, overwritten per call. */
  solve(moments: Float64Array): ConicSolution;
}

/** The fit core shared by the batch fit and the online correction; allocation-free after construction. */
export function createConicSolver(method: EllipseFitMethod): ConicSolver {
  const centred = new Float64Array(MOMENT_COUNT);
  const average = new Float64Array(MOMENT_COUNT);
  const gram = new Float64Array(25); // E[ξ ξᵀ] over the features ξ = (a², b², ab, a, b)
  const mean = new Float64Array(5); // E[ξ]
  const covariance = new Float64Array(25);
  const taubin = new Float64Array(25);
  const constraint = new Float64Array(25);
  const theta = new Float64Array(5);
  const eigen = createGeneralizedEigenSolver(5);
  const solution: ConicSolution = {
    status: 'degenerate', A: 0, B: 0, C: 0, D: 0, E: 0, centreU: 0, centreV: 0, scale: 0,
    p: 0, q: 0, R: 0, G: 0, alphaRad: 0, residualRms: NaN,
  };
  const avg = (i: number, j: number): number => average[momentIndex(i, j)]!;

  function fail(status: 'degenerate' | 'not-an-ellipse'): ConicSolution {
    solution.status = status;
    solution.residualRms = NaN;
    return solution;
  }

  /** Heydemann: F fixed at −1, the 5×5 normal equations E[ξξᵀ]θ = E[ξ] (Cholesky; E[ξξᵀ] is definite off a line). */
  function solveHeydemann(): boolean {
    covariance.set(gram);
    if (!choleskyInPlace(covariance, 5)) return false;
    for (let row = 0; row < 5; row++) {
      let sum = mean[row]!;
      for (let k = 0; k < row; k++) sum -= covariance[row * 5 + k]! * theta[k]!;
      theta[row] = sum / covariance[row * 5 + row]!;
    }
    for (let row = 4; row >= 0; row--) {
      let sum = theta[row]!;
      for (let k = row + 1; k < 5; k++) sum -= covariance[k * 5 + row]! * theta[k]!;
      theta[row] = sum / covariance[row * 5 + row]!;
    }
    return true;
  }

  /**
   * Taubin and hyper. With g = E[ξ]·θ₁ + F the cost is θᵀMθ = θ₁ᵀSθ₁ + g² (S the covariance of ξ), Taubin's
   * normalisation θ₁ᵀN_Tθ₁ does not involve F (so g = 0), and hyper's adds 2g(A + B) (e = (1, 1, 0, 0, 0, 0):
   * E[Δ²ξ] = σ²e). Hyper's stationarity conditions, Sθ₁ = λ(N_T + λ e eᵀ)θ₁ and g = λ eᵀθ₁, are solved by a
   * fixed-point iteration from Taubin's λ; λ is O(σ²), so it converges in a few steps.
   * Returns F, or NaN when the normalisation matrix is not definite.
   */
  function solveEigen(): number {
    let lambda = 0;
    for (let iteration = 0; iteration < 50; iteration++) {
      constraint.set(taubin);
      constraint[0] += lambda;
      constraint[1] += lambda;
      constraint[5] += lambda;
      constraint[6] += lambda;
      const next = eigen.smallest(covariance, constraint, theta);
      if (next !== next) return NaN;
      const settled = Math.abs(next - lambda) <= 1e-15 + 1e-12 * Math.abs(next);
      lambda = next;
      if (method === 'taubin' || settled) break;
    }
    const g = method === 'hyper' ? lambda * (theta[0]! + theta[1]!) : 0;
    let projection = 0;
    for (let k = 0; k < 5; k++) projection += mean[k]! * theta[k]!;
    return g - projection;
  }

  function solve(moments: Float64Array): ConicSolution {
    const n = moments[0]!;
    if (!(n > 0)) return fail('degenerate');
    const meanU = moments[1]! / n;
    const meanV = moments[2]! / n;
    // Centre the sums on the centroid: Σ(u − ū)^i (v − v̄)^j by the binomial expansion (`average` is free here).
    centred.set(moments);
    shiftMoments(centred, -meanU, -meanV, average);
    const scale = Math.sqrt((centred[3]! + centred[5]!) / n);
    if (!(scale > 0) || !Number.isFinite(scale)) return fail('degenerate');
    for (let i = 0; i <= 4; i++) {
      for (let j = 0; i + j <= 4; j++) average[momentIndex(i, j)] = centred[momentIndex(i, j)]! / (n * scale ** (i + j));
    }
    for (let row = 0; row < 5; row++) {
      mean[row] = avg(FEATURE_I[row]!, FEATURE_J[row]!);
      for (let col = 0; col < 5; col++) gram[row * 5 + col] = avg(FEATURE_I[row]! + FEATURE_I[col]!, FEATURE_J[row]! + FEATURE_J[col]!);
    }

    let F = -1;
    if (method === 'heydemann') {
      if (!solveHeydemann()) return fail('degenerate');
    } else {
      for (let row = 0; row < 5; row++) {
        for (let col = 0; col < 5; col++) covariance[row * 5 + col] = gram[row * 5 + col]! - mean[row]! * mean[col]!;
      }
      // N_T = E[∇ξ ∇ξᵀ] with ∂ξ/∂a = (2a, 0, b, 1, 0), ∂ξ/∂b = (0, 2b, a, 0, 1).
      const a = avg(1, 0), b = avg(0, 1), aa = avg(2, 0), bb = avg(0, 2), ab = avg(1, 1);
      taubin.set([
        4 * aa, 0, 2 * ab, 2 * a, 0,
        0, 4 * bb, 2 * ab, 0, 2 * b,
        2 * ab, 2 * ab, aa + bb, b, a,
        2 * a, 0, b, 1, 0,
        0, 2 * b, a, 0, 1,
      ]);
      F = solveEigen();
      if (F !== F) return fail('degenerate');
      let norm = 0;
      for (let k = 0; k < 5; k++) norm = Math.max(norm, Math.abs(theta[k]!));
      // F = 0 would put the centroid on the conic: not an ellipse around the samples.
      if (!(Math.abs(F) > 1e-12 * norm)) return fail('not-an-ellipse');
      for (let k = 0; k < 5; k++) theta[k] = theta[k]! / -F;
    }

    const A = theta[0]!, B = theta[1]!, C = theta[2]!, D = theta[3]!, E = theta[4]!;
    solution.A = A; solution.B = B; solution.C = C; solution.D = D; solution.E = E;
    solution.centreU = meanU;
    solution.centreV = meanV;
    solution.scale = scale;
    // Heydemann's closed form (Appl. Opt. 20(19), 1981), as `heydemannFromConic`, written out to stay allocation-free.
    const discriminant = 4 * A * B - C * C;
    if (!(A > 0 && B > 0 && discriminant > 0)) return fail('not-an-ellipse');
    const p = (2 * B * D - E * C) / -discriminant;
    const q = (2 * A * E - D * C) / -discriminant;
    const radiusSquared = (4 * B * (1 + A * p * p + B * q * q + C * p * q)) / discriminant;
    if (!(radiusSquared > 0)) return fail('not-an-ellipse');
    const R = Math.sqrt(radiusSquared);
    const alphaRad = Math.asin(C / Math.sqrt(4 * A * B));
    solution.p = p; solution.q = q; solution.R = R; solution.G = Math.sqrt(B / A); solution.alphaRad = alphaRad;
    // As in the classic fit: r² − 1 = λ·(conic − 1), λ = 1/(A R² cos²α); E[(conic − 1)²] = θᵀE[ξξᵀ]θ − 2θᵀE[ξ] + 1.
    let quadratic = 1;
    for (let row = 0; row < 5; row++) {
      quadratic -= 2 * theta[row]! * mean[row]!;
      for (let col = 0; col < 5; col++) quadratic += theta[row]! * theta[col]! * gram[row * 5 + col]!;
    }
    const cosAlpha = Math.cos(alphaRad);
    solution.residualRms = Math.sqrt(Math.max(0, quadratic)) / (2 * Math.abs(A * R * R * cosAlpha * cosAlpha));
    solution.status = 'ok';
    return solution;
  }

  return { solve };
}

/** Maps a solution back from the conditioned frame: (u, v) = (x − originX, y − originY). */
export function calibrationOfSolution(solution: ConicSolution, originX: number, originY: number): EllipseCalibration {
  return fromHeydemann({
    p: originX + solution.centreU + solution.scale * solution.p,
    q: originY + solution.centreV + solution.scale * solution.q,
    R: solution.scale * solution.R,
    G: solution.G,
    alphaRad: solution.alphaRad,
  });
}

/** Options of `createEllipseFit`: the classic fit's acceptance rules plus the method. */
export interface EllipseFitMethodOptions extends EllipseFitOptions {
  /**
   * 'heydemann' (classic algebraic fit, biased under noise), 'taubin' (Taubin 1991) or 'hyper' (hyper least
   * squares, Kanatani & Rangarajan 2011: second-order bias removed). Default 'hyper'.
   */
  readonly method?: EllipseFitMethod;
}

export interface EllipseFit {
  readonly method: EllipseFitMethod;
  /** Fits the accumulator's samples; same result shape and acceptance rules as `EllipseAccumulator.solve`. */
  solve(accumulator: EllipseAccumulator): EllipseFitResult;
}

export function createEllipseFit(options: EllipseFitMethodOptions = {}): EllipseFit {
  const method = oneOf('method', options.method ?? 'hyper', ELLIPSE_FIT_METHODS);
  const limits = resolveFitLimits(options);
  const { minSamples } = limits;
  const solver = createConicSolver(method);

  function solve(accumulator: EllipseAccumulator): EllipseFitResult {
    const { shiftX, shiftY, moments } = accumulator.state;
    const n = moments[0]!;
    const fail = (reason: 'too-few-samples' | 'degenerate' | 'not-an-ellipse' | 'implausible' | 'low-coverage', message: string, coverage = NaN): EllipseFitResult =>
      ({ ok: false, reason, message, samples: n, coverage });
    if (n < minSamples) return fail('too-few-samples', `the fit needs at least ${minSamples} samples (got ${n})`);
    const solution = solver.solve(moments);
    if (solution.status === 'degenerate') {
      return fail('degenerate', `the samples lie on a line or a point: the ${method} conic fit is singular`);
    }
    if (solution.status === 'not-an-ellipse') {
      return fail(
        'not-an-ellipse',
        `the ${method} conic is not an ellipse: too little of the ellipse is covered or the signal is not quadrature`,
      );
    }
    const calibration = calibrationOfSolution(solution, shiftX, shiftY);
    const conic: Conic = { A: solution.A, B: solution.B, C: solution.C, D: solution.D, E: solution.E };
    return acceptFit(
      {
        calibration,
        residualRms: solution.residualRms,
        samples: n,
        conic,
        frame: { centreX: shiftX + solution.centreU, centreY: shiftY + solution.centreV, scale: solution.scale },
      },
      coverageOfFit(accumulator.state, calibration),
      limits,
    );
  }

  return { method, solve };
}
