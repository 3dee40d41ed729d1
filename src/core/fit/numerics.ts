// Small dense symmetric linear algebra for the ellipse fits (n <= 6): Cholesky factorisation and the cyclic
// Jacobi eigenvalue method (Golub & Van Loan, Matrix Computations, §8.5 — memory), allocation-free after
// construction. Matrices are row-major Float64Arrays of n·n entries.

/**
 * Factors a symmetric positive definite matrix as L·Lᵀ in place (L in the lower triangle, the strict upper
 * triangle set to 0). False when a pivot is not positive, i.e. the matrix is not positive definite.
 */
export function choleskyInPlace(matrix: Float64Array, n: number): boolean {
  for (let col = 0; col < n; col++) {
    let pivot = matrix[col * n + col]!;
    for (let k = 0; k < col; k++) pivot -= matrix[col * n + k]! ** 2;
    if (!(pivot > 0)) return false;
    const diagonal = Math.sqrt(pivot);
    matrix[col * n + col] = diagonal;
    for (let row = col + 1; row < n; row++) {
      let sum = matrix[row * n + col]!;
      for (let k = 0; k < col; k++) sum -= matrix[row * n + k]! * matrix[col * n + k]!;
      matrix[row * n + col] = sum / diagonal;
    }
    for (let k = col + 1; k < n; k++) matrix[col * n + k] = 0;
  }
  return true;
}

/**
 * Eigenvalues and eigenvectors of a symmetric matrix by cyclic Jacobi rotations: `matrix` is destroyed,
 * `values[k]` receives the k-th eigenvalue (unsorted) and column k of `vectors` its unit eigenvector.
 * Jacobi is slow for large n but exact to rounding for small ones and needs no shifts or deflation.
 */
export function symmetricEigenInPlace(matrix: Float64Array, n: number, values: Float64Array, vectors: Float64Array): void {
  vectors.fill(0, 0, n * n);
  for (let k = 0; k < n; k++) vectors[k * n + k] = 1;
  let scale = 0;
  for (let k = 0; k < n * n; k++) scale += matrix[k]! ** 2;
  const threshold = scale * 1e-32;
  for (let sweep = 0; sweep < 60; sweep++) {
    let offDiagonal = 0;
    for (let p = 0; p < n; p++) for (let q = p + 1; q < n; q++) offDiagonal += matrix[p * n + q]! ** 2;
    if (!(offDiagonal > threshold)) break;
    for (let p = 0; p < n; p++) {
      for (let q = p + 1; q < n; q++) {
        const apq = matrix[p * n + q]!;
        if (apq === 0) continue;
        const app = matrix[p * n + p]!;
        const aqq = matrix[q * n + q]!;
        // The rotation angle that zeroes a_pq, in the stable form (Rutishauser).
        const theta = (aqq - app) / (2 * apq);
        const t = (theta >= 0 ? 1 : -1) / (Math.abs(theta) + Math.sqrt(theta * theta + 1));
        const c = 1 / Math.sqrt(t * t + 1);
        const s = t * c;
        for (let k = 0; k < n; k++) {
          const akp = matrix[k * n + p]!;
          const akq = matrix[k * n + q]!;
          matrix[k * n + p] = c * akp - s * akq;
          matrix[k * n + q] = s * akp + c * akq;
        }
        for (let k = 0; k < n; k++) {
          const apk = matrix[p * n + k]!;
          const aqk = matrix[q * n + k]!;
          matrix[p * n + k] = c * apk - s * aqk;
          matrix[q * n + k] = s * apk + c * aqk;
        }
        for (let k = 0; k < n; k++) {
          const vkp = vectors[k * n + p]!;
          const vkq = vectors[k * n + q]!;
          vectors[k * n + p] = c * vkp - s * vkq;
          vectors[k * n + q] = s * vkp + c * vkq;
        }
      }
    }
  }
  for (let k = 0; k < n; k++) values[k] = matrix[k * n + k]!;
}

/** Solves S·θ = λ·B·θ (S symmetric, B symmetric positive definite) for its smallest eigenvalue. */
export interface GeneralizedEigenSolver {
  /**
   * Writes the eigenvector of the smallest eigenvalue into `vector` (scaled so that θᵀBθ = 1) and returns the
   * eigenvalue, or NaN when B is not positive definite. `s` and `b` are left unchanged.
   */
  smallest(s: Float64Array, b: Float64Array, vector: Float64Array): number;
}

export function createGeneralizedEigenSolver(n: number): GeneralizedEigenSolver {
  const factor = new Float64Array(n * n);
  const reduced = new Float64Array(n * n);
  const values = new Float64Array(n);
  const vectors = new Float64Array(n * n);
  const column = new Float64Array(n);

  function smallest(s: Float64Array, b: Float64Array, vector: Float64Array): number {
    factor.set(b.subarray(0, n * n));
    if (!choleskyInPlace(factor, n)) return NaN;
    // reduced = L⁻¹ S L⁻ᵀ: forward substitution on the columns of S, then on the rows of the result.
    reduced.set(s.subarray(0, n * n));
    for (let col = 0; col < n; col++) {
      for (let row = 0; row < n; row++) {
        let sum = reduced[row * n + col]!;
        for (let k = 0; k < row; k++) sum -= factor[row * n + k]! * reduced[k * n + col]!;
        reduced[row * n + col] = sum / factor[row * n + row]!;
      }
    }
    for (let row = 0; row < n; row++) {
      for (let col = 0; col < n; col++) {
        let sum = reduced[row * n + col]!;
        for (let k = 0; k < col; k++) sum -= factor[col * n + k]! * reduced[row * n + k]!;
        reduced[row * n + col] = sum / factor[col * n + col]!;
      }
    }
    // Rounding leaves it a hair off symmetric; Jacobi assumes symmetry, so average the halves.
    for (let row = 0; row < n; row++) {
      for (let col = row + 1; col < n; col++) {
        const mean = 0.5 * (reduced[row * n + col]! + reduced[col * n + row]!);
        reduced[row * n + col] = mean;
        reduced[col * n + row] = mean;
      }
    }
    symmetricEigenInPlace(reduced, n, values, vectors);
    let best = 0;
    for (let k = 1; k < n; k++) if (values[k]! < values[best]!) best = k;
    for (let k = 0; k < n; k++) column[k] = vectors[k * n + best]!;
    // θ = L⁻ᵀ y: back substitution with Lᵀ.
    for (let row = n - 1; row >= 0; row--) {
      let sum = column[row]!;
      for (let k = row + 1; k < n; k++) sum -= factor[k * n + row]! * vector[k]!;
      vector[row] = sum / factor[row * n + row]!;
    }
    return values[best]!;
  }

  return { smallest };
}
