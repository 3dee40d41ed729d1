// The conic fits, each written once, from the moment sums x^i y^j (i + j <= 4) in a conditioned frame:
//  - 'heydemann': least squares of A a² + B b² + C ab + D a + E b = 1 (Heydemann, Appl. Opt. 20(19), 1981);
//  - 'taubin': G. Taubin, IEEE TPAMI 13(11), 1115-1138 (1991): min θᵀMθ / θᵀN_Tθ, N_T the mean first-order
//    covariance of the monomials under isotropic noise (gradient-weighted normalisation);
//  - 'hyper': hyper least squares, K. Kanatani & P. Rangarajan, Comput. Stat. Data Anal. 55 (2011) (volume from
//    memory), after Al-Sharadqah & Chernov, Electron. J. Statist. 3 (2009): N_H = N_T + 2·S[ξ̄ eᵀ], which cancels
//    the second-order (σ²) bias of the algebraic fit. Their O(σ²/n) terms need per-sample products of degree 6
//    and are left out here; at the thousands of samples a calibration uses they are far below the bias removed.
// The classic solver needs no eigen-solver, so the embedded bundle, which fits only with it, stays small.

import { fromHeydemann, type EllipseCalibration } from './ellipse.js';
import { MOMENT_COUNT, momentIndex, shiftMoments } from './moments.js';
import { createGeneralizedEigenSolver } from './numerics.js';

export const ELLIPSE_FIT_METHODS = ['heydemann', 'taubin', 'hyper'] as const;
/** The method when none is named (the batch fit's and the online correction's default). */
export const DEFAULT_ELLIPSE_FIT_METHOD = 'hyper';
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
  readonly method: EllipseFitMethod;
  /** Solves from 15 moment sums (any positive weights); the result object is the solver's own, overwritten per call. */
  solve(moments: Float64Array): ConicSolution;
}

/**
 * One step of a method: from the conditioned averages (`average`, indexed by `momentIndex`), the features' Gram
 * matrix E[ξξᵀ] and mean E[ξ], writes the conic's coefficients θ (A a² + B b² + C ab + D a + E b = 1) into
 * `theta`; returns the failure, or null.
 */
type ConicStep = (average: Float64Array, gram: Float64Array, mean: Float64Array, theta: Float64Array) => ConicSolution['status'] | null;

/**
 * What every method shares: the conditioning of the sums (centred on the centroid, scaled by the RMS distance
 * from it), the features' mean and Gram matrix, and Heydemann's closed form from the solved conic.
 */
function createSolver(method: EllipseFitMethod, step: ConicStep): ConicSolver {
  const centred = new Float64Array(MOMENT_COUNT);
  const average = new Float64Array(MOMENT_COUNT);
  const gram = new Float64Array(25); // E[ξ ξᵀ] over the features ξ = (a², b², ab, a, b)
  const mean = new Float64Array(5); // E[ξ]
  const theta = new Float64Array(5);
  // Fields are filled as the solve gets to them; a failed solve leaves the rest from an earlier one.
  const solution = { status: 'degenerate' } as ConicSolution;

  function fail(status: ConicSolution['status']): ConicSolution {
    solution.status = status;
    return solution;
  }

  function solve(moments: Float64Array): ConicSolution {
    // No samples (n = 0) make the scale NaN below: degenerate too.
    const n = moments[0]!;
    const meanU = moments[1]! / n;
    const meanV = moments[2]! / n;
    // Centre the sums on the centroid: Σ(u − ū)^i (v − v̄)^j by the binomial expansion (`average` is free here).
    centred.set(moments);
    shiftMoments(centred, -meanU, -meanV, average);
    const scale = Math.sqrt((centred[3]! + centred[5]!) / n);
    if (!(scale > 0 && scale < Infinity)) return fail('degenerate');
    for (let i = 0; i <= 4; i++) {
      for (let j = 0; i + j <= 4; j++) average[momentIndex(i, j)] = centred[momentIndex(i, j)]! / (n * scale ** (i + j));
    }
    for (let row = 0; row < 5; row++) {
      mean[row] = average[momentIndex(FEATURE_I[row]!, FEATURE_J[row]!)]!;
      for (let col = 0; col < 5; col++) {
        gram[row * 5 + col] = average[momentIndex(FEATURE_I[row]! + FEATURE_I[col]!, FEATURE_J[row]! + FEATURE_J[col]!)]!;
      }
    }
    solution.centreU = meanU;
    solution.centreV = meanV;
    solution.scale = scale;
    const failure = step(average, gram, mean, theta);
    if (failure !== null) return fail(failure);

    // Heydemann's closed form (Appl. Opt. 20(19), 1981), as `heydemannFromConic`, written out to stay allocation-free.
    const A = theta[0]!, B = theta[1]!, C = theta[2]!, D = theta[3]!, E = theta[4]!;
    solution.A = A; solution.B = B; solution.C = C; solution.D = D; solution.E = E;
    const discriminant = 4 * A * B - C * C;
    const p = (2 * B * D - E * C) / -discriminant;
    const q = (2 * A * E - D * C) / -discriminant;
    const radiusSquared = (4 * B * (1 + A * p * p + B * q * q + C * p * q)) / discriminant;
    if (!(A > 0 && B > 0 && discriminant > 0 && radiusSquared > 0)) return fail('not-an-ellipse');
    const R = Math.sqrt(radiusSquared);
    const alphaRad = Math.asin(C / Math.sqrt(4 * A * B));
    solution.p = p; solution.q = q; solution.R = R; solution.G = Math.sqrt(B / A); solution.alphaRad = alphaRad;
    // r² − 1 = λ·(conic(a, b) − 1) with λ = 1/(A R² cos²α): both vanish on the ellipse and share the a² term.
    // E[(conic − 1)²] = θᵀE[ξξᵀ]θ − 2θᵀE[ξ] + 1 over the same averages.
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

  return { method, solve };
}

/**
 * The classic fit: F fixed at −1, the 5×5 normal equations E[ξξᵀ]θ = E[ξ], by Gauss-Jordan elimination. E[ξξᵀ]
 * is symmetric positive definite unless the samples lie on a line or a point, so its pivots stay positive with no
 * pivoting (as in Cholesky's method); a pivot that is not is reported as a singular fit.
 */
export function createHeydemannSolver(): ConicSolver {
  const work = new Float64Array(30); // [E[ξξᵀ] | E[ξ]], 5 rows of 6
  return createSolver('heydemann', (_average, gram, mean, theta) => {
    for (let row = 0; row < 5; row++) {
      for (let col = 0; col < 5; col++) work[row * 6 + col] = gram[row * 5 + col]!;
      work[row * 6 + 5] = mean[row]!;
    }
    for (let pivot = 0; pivot < 5; pivot++) {
      const diagonal = work[pivot * 7]!;
      if (!(diagonal > 0)) return 'degenerate';
      for (let row = 0; row < 5; row++) {
        const factor = work[row * 6 + pivot]! / diagonal;
        if (row !== pivot) for (let col = pivot; col < 6; col++) work[row * 6 + col] -= factor * work[pivot * 6 + col]!;
      }
    }
    for (let row = 0; row < 5; row++) theta[row] = work[row * 6 + 5]! / work[row * 7]!;
    return null;
  });
}

/** The fit of `method`, allocation-free after construction; shared by the batch fit and the online correction. */
export function createConicSolver(method: EllipseFitMethod): ConicSolver {
  if (method === 'heydemann') return createHeydemannSolver();
  const covariance = new Float64Array(25);
  const taubin = new Float64Array(25);
  const constraint = new Float64Array(25);
  const eigen = createGeneralizedEigenSolver(5);

  /**
   * Taubin and hyper. With g = E[ξ]·θ₁ + F the cost is θᵀMθ = θ₁ᵀSθ₁ + g² (S the covariance of ξ), Taubin's
   * normalisation θ₁ᵀN_Tθ₁ does not involve F (so g = 0), and hyper's adds 2g(A + B) (e = (1, 1, 0, 0, 0, 0):
   * E[Δ²ξ] = σ²e). Hyper's stationarity conditions, Sθ₁ = λ(N_T + λ e eᵀ)θ₁ and g = λ eᵀθ₁, are solved by a
   * fixed-point iteration from Taubin's λ; λ is O(σ²), so it converges in a few steps.
   * Fails when the normalisation matrix is not definite, or when F = 0.
   */
  return createSolver(method, (average, gram, mean, theta) => {
    const avg = (i: number, j: number): number => average[momentIndex(i, j)]!;
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
    let lambda = 0;
    for (let iteration = 0; iteration < 50; iteration++) {
      constraint.set(taubin);
      constraint[0] += lambda;
      constraint[1] += lambda;
      constraint[5] += lambda;
      constraint[6] += lambda;
      const next = eigen.smallest(covariance, constraint, theta);
      if (next !== next) return 'degenerate';
      const settled = Math.abs(next - lambda) <= 1e-15 + 1e-12 * Math.abs(next);
      lambda = next;
      if (method === 'taubin' || settled) break;
    }
    const g = method === 'hyper' ? lambda * (theta[0]! + theta[1]!) : 0;
    let projection = 0;
    for (let k = 0; k < 5; k++) projection += mean[k]! * theta[k]!;
    const F = g - projection;
    let norm = 0;
    for (let k = 0; k < 5; k++) norm = Math.max(norm, Math.abs(theta[k]!));
    // F = 0 would put the centroid on the conic: not an ellipse around the samples.
    if (!(Math.abs(F) > 1e-12 * norm)) return 'not-an-ellipse';
    for (let k = 0; k < 5; k++) theta[k] = theta[k]! / -F;
    return null;
  });
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
