// Checks of the small dense solvers behind the ellipse fits against ml-matrix (third-party doc: a general-purpose
// linear-algebra library, used as an independent reference for Cholesky and symmetric eigen decompositions).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { CholeskyDecomposition, EigenvalueDecomposition, Matrix, inverse } from 'ml-matrix';
import { choleskyInPlace, createGeneralizedEigenSolver, symmetricEigenInPlace } from '../../src/core/fit/numerics.js';

/** A random symmetric n×n matrix, and a positive definite one (RᵀR + n·I). */
const symmetric = (n: number) =>
  fc.array(fc.double({ min: -10, max: 10, noNaN: true }), { minLength: n * n, maxLength: n * n }).map((entries) => {
    const m = Float64Array.from(entries);
    for (let r = 0; r < n; r++) for (let c = 0; c < r; c++) m[r * n + c] = m[c * n + r]!;
    return m;
  });
const positiveDefinite = (n: number) =>
  fc.array(fc.double({ min: -3, max: 3, noNaN: true }), { minLength: n * n, maxLength: n * n }).map((entries) => {
    const m = new Float64Array(n * n);
    for (let r = 0; r < n; r++) {
      for (let c = 0; c < n; c++) {
        let sum = r === c ? n : 0;
        for (let k = 0; k < n; k++) sum += entries[k * n + r]! * entries[k * n + c]!;
        m[r * n + c] = sum;
      }
    }
    return m;
  });
const toMatrix = (m: Float64Array, n: number) => new Matrix(Array.from({ length: n }, (_, r) => Array.from(m.subarray(r * n, (r + 1) * n))));

describe('choleskyInPlace', () => {
  it('matches ml-matrix CholeskyDecomposition on random positive definite 6×6 matrices', () => {
    fc.assert(
      fc.property(positiveDefinite(6), (m) => {
        const reference = new CholeskyDecomposition(toMatrix(m, 6)).lowerTriangularMatrix;
        const ours = Float64Array.from(m);
        expect(choleskyInPlace(ours, 6)).toBe(true);
        for (let r = 0; r < 6; r++) for (let c = 0; c < 6; c++) expect(ours[r * 6 + c]).toBeCloseTo(reference.get(r, c), 10);
      }),
      { numRuns: 50, seed: 11 },
    );
  });

  it('refuses a matrix that is not positive definite', () => {
    // diag(1, −1): an indefinite matrix (common practice: Cholesky exists only for definite matrices).
    expect(choleskyInPlace(Float64Array.from([1, 0, 0, -1]), 2)).toBe(false);
  });
});

describe('symmetricEigenInPlace (cyclic Jacobi)', () => {
  it('gives the eigenvalues of ml-matrix EigenvalueDecomposition and orthonormal eigenvectors', () => {
    fc.assert(
      fc.property(symmetric(6), (m) => {
        const reference = [...new EigenvalueDecomposition(toMatrix(m, 6), { assumeSymmetric: true }).realEigenvalues].sort((a, b) => a - b);
        const work = Float64Array.from(m);
        const values = new Float64Array(6);
        const vectors = new Float64Array(36);
        symmetricEigenInPlace(work, 6, values, vectors);
        const sorted = [...values].sort((a, b) => a - b);
        // Tolerance: 1e-9 of the matrix size (entries up to 10), rounding of a few dozen rotations.
        for (let k = 0; k < 6; k++) expect(Math.abs(sorted[k]! - reference[k]!)).toBeLessThan(1e-9 * 60);
        for (let k = 0; k < 6; k++) {
          // A·v = λ·v for each column.
          for (let r = 0; r < 6; r++) {
            let av = 0;
            for (let c = 0; c < 6; c++) av += m[r * 6 + c]! * vectors[c * 6 + k]!;
            expect(Math.abs(av - values[k]! * vectors[r * 6 + k]!)).toBeLessThan(1e-8);
          }
        }
      }),
      { numRuns: 50, seed: 12 },
    );
  });
});

describe('createGeneralizedEigenSolver', () => {
  it('finds the smallest eigenvalue of S·θ = λ·B·θ as ml-matrix does for B⁻¹S', () => {
    fc.assert(
      fc.property(symmetric(5), positiveDefinite(5), (s, b) => {
        const reference = Math.min(...new EigenvalueDecomposition(inverse(toMatrix(b, 5)).mmul(toMatrix(s, 5))).realEigenvalues);
        const vector = new Float64Array(5);
        const lambda = createGeneralizedEigenSolver(5).smallest(s, b, vector);
        expect(Math.abs(lambda - reference)).toBeLessThan(1e-8 * (1 + Math.abs(reference)));
        for (let r = 0; r < 5; r++) {
          let residual = 0;
          for (let c = 0; c < 5; c++) residual += (s[r * 5 + c]! - lambda * b[r * 5 + c]!) * vector[c]!;
          expect(Math.abs(residual)).toBeLessThan(1e-8);
        }
      }),
      { numRuns: 50, seed: 13 },
    );
  });

  it('returns NaN when B is not positive definite', () => {
    const b = new Float64Array(25);
    expect(createGeneralizedEigenSolver(5).smallest(new Float64Array(25), b, new Float64Array(5))).toBeNaN();
  });
});
