// Moment sums Σ u^i v^j (i + j <= 4) of quadrature samples: everything the conic fits need, so that no fit stores
// samples and two sets of sums merge exactly after a shift of origin.

/** Moment sums Σ u^i v^j for i + j <= 4, stored at index (i+j)(i+j+1)/2 + j (see `momentIndex`). */
export const MOMENT_COUNT = 15;
export function momentIndex(i: number, j: number): number {
  const degree = i + j;
  return (degree * (degree + 1)) / 2 + j;
}
/** Pascal's triangle to row 4, row after row: C(i, k) sits at momentIndex(i − k, k). */
const BINOMIAL = [1, 1, 1, 1, 2, 1, 1, 3, 3, 1, 1, 4, 6, 4, 1];

/** Rewrites sums of u^i v^j as sums of (u + du)^i (v + dv)^j, in place (`scratch`: any MOMENT_COUNT array). */
export function shiftMoments(moments: Float64Array, du: number, dv: number, scratch: Float64Array): void {
  for (let i = 0; i <= 4; i++) {
    for (let j = 0; i + j <= 4; j++) {
      let sum = 0;
      for (let k = 0; k <= i; k++) {
        for (let l = 0; l <= j; l++) {
          sum += BINOMIAL[momentIndex(i - k, k)]! * BINOMIAL[momentIndex(j - l, l)]! * du ** (i - k) * dv ** (j - l) * moments[momentIndex(k, l)]!;
        }
      }
      scratch[momentIndex(i, j)] = sum;
    }
  }
  moments.set(scratch);
}

