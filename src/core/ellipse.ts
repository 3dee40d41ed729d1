// Ellipse (Heydemann 1981) fit of quadrature samples in accumulator form: running sums of the monomials
// x^i y^j (i + j <= 4) are all the least-squares conic fit needs, so a fit needs no stored samples and two
// accumulators merge exactly. P. L. M. Heydemann, Applied Optics 20(19), 3382-3384 (1981).

import { integerInRange, MAX_COUNT, numberInRange, OptionError } from './options.js';
import { TWO_PI } from './phase.js';

/**
 * The ellipse of a pair of quadrature signals, in the one convention fringetally uses everywhere:
 *
 *     x = amplitudeX · cos φ + offsetX
 *     y = amplitudeY · sin(φ + phaseErrorRad) + offsetY
 *
 * φ is the interference phase; positive displacement advances φ. Offsets and amplitudes are in the input's
 * own units (ADC counts for integer captures).
 *
 * Heydemann writes `x = R cos δ + p`, `y = (R/G) sin(δ − α) + q`. The mapping (see `fromHeydemann`):
 * offsetX = p, offsetY = q, amplitudeX = R, amplitudeY = R/G, phaseErrorRad = −α, φ = δ.
 */
export interface EllipseCalibration {
  readonly offsetX: number;
  readonly offsetY: number;
  readonly amplitudeX: number;
  readonly amplitudeY: number;
  readonly phaseErrorRad: number;
}

/** Heydemann's own parameters: `x = R cos δ + p`, `y = (R/G) sin(δ − α) + q`. */
export interface HeydemannParameters {
  readonly p: number;
  readonly q: number;
  readonly R: number;
  readonly G: number;
  readonly alphaRad: number;
}

export function fromHeydemann(h: HeydemannParameters): EllipseCalibration {
  return { offsetX: h.p, offsetY: h.q, amplitudeX: h.R, amplitudeY: h.R / h.G, phaseErrorRad: -h.alphaRad };
}

export function toHeydemann(c: EllipseCalibration): HeydemannParameters {
  return { p: c.offsetX, q: c.offsetY, R: c.amplitudeX, G: c.amplitudeX / c.amplitudeY, alphaRad: -c.phaseErrorRad };
}

/** Coefficients of the conic `A x² + B y² + C xy + D x + E y = 1`. */
export interface Conic {
  readonly A: number;
  readonly B: number;
  readonly C: number;
  readonly D: number;
  readonly E: number;
}

/**
 * Heydemann's closed form from the conic to the ellipse parameters, or null when the conic is not an
 * ellipse (the fit must then be rejected): requires A > 0, B > 0 and 4AB − C² > 0.
 *   p = (2BD − EC)/(C² − 4AB),  q = (2AE − DC)/(C² − 4AB),  G = √(B/A),  α = asin(C/√(4AB)),
 *   R = √(4B(1 + Ap² + Bq² + Cpq)/(4AB − C²)).
 */
export function heydemannFromConic(conic: Conic): HeydemannParameters | null {
  const { A, B, C, D, E } = conic;
  const discriminant = 4 * A * B - C * C;
  if (!(A > 0 && B > 0 && discriminant > 0)) return null;
  const p = (2 * B * D - E * C) / -discriminant;
  const q = (2 * A * E - D * C) / -discriminant;
  const radiusSquared = (4 * B * (1 + A * p * p + B * q * q + C * p * q)) / discriminant;
  if (!(radiusSquared > 0)) return null;
  return { p, q, R: Math.sqrt(radiusSquared), G: Math.sqrt(B / A), alphaRad: Math.asin(C / Math.sqrt(4 * A * B)) };
}

export type EllipseFitFailure = 'too-few-samples' | 'degenerate' | 'not-an-ellipse' | 'implausible' | 'low-coverage';

/** Where the fit was solved: coordinates `a = (x − centreX)/scale`, `b = (y − centreY)/scale`. */
export interface FitFrame {
  readonly centreX: number;
  readonly centreY: number;
  readonly scale: number;
}

export type EllipseFitResult =
  | {
      readonly ok: true;
      readonly calibration: EllipseCalibration;
      /** RMS of (corrected radius − 1): the fit residual relative to the radius. */
      readonly residualRms: number;
      /** Share of the fringe's phase reached, in [0, 1], in 10° bins (see `EllipseAccumulator.solve`). */
      readonly coverage: number;
      readonly samples: number;
      /** The least-squares conic in the conditioned frame, for cross-checks. */
      readonly conic: Conic;
      readonly frame: FitFrame;
    }
  | {
      readonly ok: false;
      readonly reason: EllipseFitFailure;
      readonly message: string;
      readonly samples: number;
      /** Coverage when it could be computed, else NaN. */
      readonly coverage: number;
    };

export interface EllipseFitOptions {
  /** Fewest samples a fit accepts. Default 32; integer in 6..2^53. */
  readonly minSamples?: number;
  /**
   * Least equivalent phase coverage accepted, as a fraction of one fringe. Default 0.75 (common practice:
   * about one full fringe of motion is needed for a well-conditioned fit); range [0, 1].
   */
  readonly minCoverage?: number;
  /** Largest accepted amplitude ratio max(aX/aY, aY/aX); beyond it the optics, not the fit, need fixing. Default 4. */
  readonly maxAmplitudeRatio?: number;
  /** Largest accepted |phaseErrorRad|. Default π/4 (45°). Range (0, π/2). */
  readonly maxPhaseErrorRad?: number;
}

/** Moment sums Σ u^i v^j for i + j <= 4, stored at index (i+j)(i+j+1)/2 + j (see `momentIndex`). */
export const MOMENT_COUNT = 15;
/** Cells per side of the coverage grid (2^GRID_BITS; cell index = row·GRID + col), and the phase bins coverage is counted in (10° each). */
const GRID_BITS = 7;
const GRID = 1 << GRID_BITS;
const COVERAGE_BINS = 36;
export function momentIndex(i: number, j: number): number {
  const degree = i + j;
  return (degree * (degree + 1)) / 2 + j;
}
const BINOMIAL = [
  [1, 0, 0, 0, 0],
  [1, 1, 0, 0, 0],
  [1, 2, 1, 0, 0],
  [1, 3, 3, 1, 0],
  [1, 4, 6, 4, 1],
];

/** Rewrites sums of u^i v^j as sums of (u + du)^i (v + dv)^j, in place (`scratch`: any MOMENT_COUNT array). */
export function shiftMoments(moments: Float64Array, du: number, dv: number, scratch: Float64Array): void {
  for (let i = 0; i <= 4; i++) {
    for (let j = 0; i + j <= 4; j++) {
      let sum = 0;
      for (let k = 0; k <= i; k++) {
        for (let l = 0; l <= j; l++) {
          sum += BINOMIAL[i]![k]! * BINOMIAL[j]![l]! * du ** (i - k) * dv ** (j - l) * moments[momentIndex(k, l)]!;
        }
      }
      scratch[momentIndex(i, j)] = sum;
    }
  }
  moments.set(scratch);
}

/** Features of the conic fit: a², b², ab, a, b. */
const FEATURES: ReadonlyArray<readonly [number, number]> = [
  [2, 0],
  [0, 2],
  [1, 1],
  [1, 0],
  [0, 1],
];

/** Solves the 5×5 system in place by Gaussian elimination with partial pivoting; false when singular. */
function solve5(matrix: Float64Array, rhs: Float64Array): boolean {
  const n = 5;
  let largest = 0;
  for (let k = 0; k < n * n; k++) largest = Math.max(largest, Math.abs(matrix[k]!));
  const tiny = largest * 1e-13;
  for (let col = 0; col < n; col++) {
    let pivotRow = col;
    for (let row = col + 1; row < n; row++) {
      if (Math.abs(matrix[row * n + col]!) > Math.abs(matrix[pivotRow * n + col]!)) pivotRow = row;
    }
    if (!(Math.abs(matrix[pivotRow * n + col]!) > tiny)) return false;
    if (pivotRow !== col) {
      for (let k = 0; k < n; k++) {
        const held = matrix[col * n + k]!;
        matrix[col * n + k] = matrix[pivotRow * n + k]!;
        matrix[pivotRow * n + k] = held;
      }
      const held = rhs[col]!;
      rhs[col] = rhs[pivotRow]!;
      rhs[pivotRow] = held;
    }
    for (let row = col + 1; row < n; row++) {
      const factor = matrix[row * n + col]! / matrix[col * n + col]!;
      for (let k = col; k < n; k++) matrix[row * n + k] -= factor * matrix[col * n + k]!;
      rhs[row] -= factor * rhs[col]!;
    }
  }
  for (let row = n - 1; row >= 0; row--) {
    let sum = rhs[row]!;
    for (let k = row + 1; k < n; k++) sum -= matrix[row * n + k]! * rhs[k]!;
    rhs[row] = sum / matrix[row * n + row]!;
  }
  return true;
}

/** Limits every fit method applies to its result (see `EllipseFitOptions`). */
export interface FitLimits {
  readonly minSamples: number;
  readonly minCoverage: number;
  readonly maxAmplitudeRatio: number;
  readonly maxPhaseErrorRad: number;
}

/** Validates the limits of `EllipseFitOptions` once, with their defaults. */
export function resolveFitLimits(options: EllipseFitOptions): FitLimits {
  const minSamples = integerInRange('minSamples', options.minSamples ?? 32, 6, MAX_COUNT);
  const minCoverage = numberInRange('minCoverage', options.minCoverage ?? 0.75, 0, 1);
  const maxAmplitudeRatio = options.maxAmplitudeRatio ?? 4;
  if (!(maxAmplitudeRatio >= 1 && Number.isFinite(maxAmplitudeRatio))) {
    throw new OptionError('maxAmplitudeRatio', 'a finite number >= 1', maxAmplitudeRatio);
  }
  const maxPhaseErrorRad = options.maxPhaseErrorRad ?? Math.PI / 4;
  if (!(maxPhaseErrorRad > 0 && maxPhaseErrorRad < Math.PI / 2)) {
    throw new OptionError('maxPhaseErrorRad', 'a number in (0, π/2)', maxPhaseErrorRad);
  }
  return { minSamples, minCoverage, maxAmplitudeRatio, maxPhaseErrorRad };
}

/**
 * The share of COVERAGE_BINS equal phase bins (corrected phase) reached by the occupied cells of an
 * accumulator's grid that lie on the given ellipse (cells inside it, e.g. from a blocked beam, say nothing of
 * the phase). A cell marks every bin its corners span: the figure passed through the cell, and a cell can be
 * wider than a bin, so marking only the bin of its centre would leave holes in a full fringe. A partial arc
 * is over-counted by at most one cell at each end.
 */
export function coverageOfFit(state: EllipseAccumulator['state'], calibration: EllipseCalibration): number {
  const { shiftX, shiftY, occupancy, gridHalfWidth } = state;
  const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = calibration;
  const tanE = Math.tan(phaseErrorRad);
  const secE = 1 / Math.cos(phaseErrorRad);
  const cell = (2 * gridHalfWidth) / GRID;
  const hit = new Uint8Array(COVERAGE_BINS);
  for (let index = 0; index < GRID * GRID; index++) {
    if (!isOccupied(occupancy, index)) continue;
    // Point k of the cell on the corrected circle: its centre (k = 4), then its corners, whose phases are
    // taken relative to the centre's (atan2 of cross and dot products, so no wrapping is needed).
    let centreU = 0;
    let centreV = 0;
    let low = 0;
    let high = 0;
    for (let k = 4; k >= 0; k--) {
      const u = (shiftX - gridHalfWidth + ((index & (GRID - 1)) + (k > 3 ? 0.5 : k & 1)) * cell - offsetX) / amplitudeX;
      const v = ((shiftY - gridHalfWidth + ((index >> GRID_BITS) + (k > 3 ? 0.5 : k >> 1)) * cell - offsetY) / amplitudeY) * secE - u * tanE;
      if (k > 3) {
        centreU = u;
        centreV = v;
      } else {
        const offset = Math.atan2(centreU * v - centreV * u, centreU * u + centreV * v);
        low = Math.min(low, offset);
        high = Math.max(high, offset);
      }
    }
    if (Math.abs(Math.hypot(centreU, centreV) - 1) > 0.3) continue;
    const centre = Math.atan2(centreV, centreU) + Math.PI;
    for (let bin = Math.floor(((centre + low) * COVERAGE_BINS) / TWO_PI); bin <= ((centre + high) * COVERAGE_BINS) / TWO_PI; bin++) {
      hit[(bin + COVERAGE_BINS) % COVERAGE_BINS] = 1;
    }
  }
  return hit.reduce((hits, bin) => hits + bin, 0) / COVERAGE_BINS;
}

function isOccupied(bits: Uint32Array, cell: number): boolean {
  return ((bits[cell >> 5]! >>> (cell & 31)) & 1) === 1;
}

function occupy(bits: Uint32Array, cell: number): void {
  bits[cell >> 5]! |= 1 << (cell & 31);
}

/** The last checks of every fit method: plausible detectors, enough coverage. */
export function acceptFit(
  fit: Omit<Extract<EllipseFitResult, { ok: true }>, 'ok' | 'coverage'>,
  coverage: number,
  limits: FitLimits,
): EllipseFitResult {
  const { calibration, samples } = fit;
  const ratio = Math.max(calibration.amplitudeX / calibration.amplitudeY, calibration.amplitudeY / calibration.amplitudeX);
  if (ratio > limits.maxAmplitudeRatio || Math.abs(calibration.phaseErrorRad) > limits.maxPhaseErrorRad) {
    return {
      ok: false,
      reason: 'implausible',
      message: `implausible ellipse: amplitude ratio ${ratio.toFixed(3)} (limit ${limits.maxAmplitudeRatio}), phase error ${calibration.phaseErrorRad.toFixed(4)} rad (limit ±${limits.maxPhaseErrorRad.toFixed(4)})`,
      samples,
      coverage,
    };
  }
  if (coverage < limits.minCoverage) {
    return {
      ok: false,
      reason: 'low-coverage',
      message: `phase coverage ${coverage.toFixed(3)} of a fringe is below the minimum ${limits.minCoverage}: record at least one full fringe of motion`,
      samples,
      coverage,
    };
  }
  return { ok: true, ...fit, coverage };
}

export interface EllipseAccumulator {
  /** Adds `length` sample pairs; non-finite pairs are skipped and counted. Never allocates. */
  add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void;
  /** Adds another accumulator's samples, as if they had been added here. */
  merge(other: EllipseAccumulator): void;
  reset(): void;
  readonly samples: number;
  readonly skippedNonFinite: number;
  /**
   * Solves the least-squares conic fit in a conditioned frame (centred on the samples' centroid, scaled by
   * their RMS distance from it, so int16 counts and unit floats fit equally well), converts it with
   * Heydemann's closed form and checks it.
   *
   * Coverage is the share of 36 phase bins (10° each, corrected phase) reached by the cells of a 128×128
   * occupancy grid of the figure that lie on the fitted ellipse (see `coverageOfFit`): dwelling at one phase
   * neither adds nor removes coverage.
   */
  solve(): EllipseFitResult;
  /** The raw sums, for merging: sums of (x − shiftX)^i (y − shiftY)^j. */
  readonly state: {
    readonly shiftX: number;
    readonly shiftY: number;
    readonly moments: Float64Array;
    /**
     * The coverage grid: GRID×GRID cells over [−gridHalfWidth, gridHalfWidth]² about the shift (row = v), as
     * bits: bit `cell & 31` of word `cell >> 5` is set when cell `row·GRID + col` was reached.
     */
    readonly occupancy: Uint32Array;
    readonly gridHalfWidth: number;
  };
}

export function createEllipseAccumulator(options: EllipseFitOptions = {}): EllipseAccumulator {
  const limits = resolveFitLimits(options);
  const { minSamples } = limits;
  const moments = new Float64Array(MOMENT_COUNT);
  const scratch = new Float64Array(MOMENT_COUNT);
  const matrix = new Float64Array(25);
  const rhs = new Float64Array(5);
  // Sums are kept about the first sample seen, so the powers stay near the signal's own size.
  let shiftX = 0;
  let shiftY = 0;
  let hasShift = false;
  let skippedNonFinite = 0;
  // Coverage comes from an occupancy grid of the figure: GRID×GRID cells over a square about the shift, which
  // doubles in size (merging 2×2 cells) whenever a sample falls outside it. A cell is marked however long the
  // signal stays in it, so dwelling neither adds nor removes coverage, and memory stays fixed.
  const occupancy = new Uint32Array((GRID * GRID) / 32);
  const zoomed = new Uint32Array(occupancy.length);
  let gridHalfWidth = 0;

  function zoomOut(): void {
    zoomed.fill(0);
    for (let index = 0; index < GRID * GRID; index++) {
      if (isOccupied(occupancy, index)) {
        occupy(zoomed, (GRID / 4 + ((index >> GRID_BITS) >> 1)) * GRID + GRID / 4 + ((index & (GRID - 1)) >> 1));
      }
    }
    occupancy.set(zoomed);
    gridHalfWidth *= 2;
  }

  function mark(u: number, v: number): void {
    if (gridHalfWidth === 0) {
      const reach = Math.max(Math.abs(u), Math.abs(v));
      if (reach === 0) return;
      gridHalfWidth = 2 * reach;
      mark(0, 0); // the first sample, at the shift
    }
    while (!(Math.abs(u) < gridHalfWidth && Math.abs(v) < gridHalfWidth)) zoomOut();
    const cellsPerUnit = GRID / (2 * gridHalfWidth);
    const col = Math.floor((u + gridHalfWidth) * cellsPerUnit);
    const row = Math.floor((v + gridHalfWidth) * cellsPerUnit);
    occupy(occupancy, Math.min(GRID - 1, row) * GRID + Math.min(GRID - 1, col));
  }

  function add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void {
    let s00 = 0, s10 = 0, s01 = 0, s20 = 0, s11 = 0, s02 = 0, s30 = 0, s21 = 0, s12 = 0, s03 = 0;
    let s40 = 0, s31 = 0, s22 = 0, s13 = 0, s04 = 0;
    for (let i = 0; i < length; i++) {
      const xi = x[i]!;
      const yi = y[i]!;
      if (!(Number.isFinite(xi) && Number.isFinite(yi))) {
        skippedNonFinite++;
        continue;
      }
      if (!hasShift) {
        shiftX = xi;
        shiftY = yi;
        hasShift = true;
      }
      const u = xi - shiftX;
      const v = yi - shiftY;
      const uu = u * u;
      const uv = u * v;
      const vv = v * v;
      s00 += 1;
      s10 += u;
      s01 += v;
      s20 += uu;
      s11 += uv;
      s02 += vv;
      s30 += uu * u;
      s21 += uu * v;
      s12 += u * vv;
      s03 += vv * v;
      s40 += uu * uu;
      s31 += uu * uv;
      s22 += uu * vv;
      s13 += uv * vv;
      s04 += vv * vv;
      mark(u, v);
    }
    moments[0] += s00;
    moments[1] += s10;
    moments[2] += s01;
    moments[3] += s20;
    moments[4] += s11;
    moments[5] += s02;
    moments[6] += s30;
    moments[7] += s21;
    moments[8] += s12;
    moments[9] += s03;
    moments[10] += s40;
    moments[11] += s31;
    moments[12] += s22;
    moments[13] += s13;
    moments[14] += s04;
  }

  function merge(other: EllipseAccumulator): void {
    const theirs = other.state;
    skippedNonFinite += other.skippedNonFinite;
    if (theirs.moments[0] === 0) return;
    const incoming = Float64Array.from(theirs.moments);
    if (!hasShift) {
      shiftX = theirs.shiftX;
      shiftY = theirs.shiftY;
      hasShift = true;
    } else {
      shiftMoments(incoming, theirs.shiftX - shiftX, theirs.shiftY - shiftY, scratch);
    }
    for (let k = 0; k < MOMENT_COUNT; k++) moments[k] += incoming[k]!;
    const d = theirs.shiftX - shiftX;
    const e = theirs.shiftY - shiftY;
    const cell = (2 * theirs.gridHalfWidth) / GRID;
    for (let index = 0; index < GRID * GRID; index++) {
      if (isOccupied(theirs.occupancy, index)) {
        mark(-theirs.gridHalfWidth + ((index & (GRID - 1)) + 0.5) * cell + d, -theirs.gridHalfWidth + ((index >> GRID_BITS) + 0.5) * cell + e);
      }
    }
  }

  function fail(reason: EllipseFitFailure, message: string, coverage = NaN): EllipseFitResult {
    return { ok: false, reason, message, samples: moments[0]!, coverage };
  }

  function solve(): EllipseFitResult {
    const n = moments[0]!;
    if (n < minSamples) return fail('too-few-samples', `too few samples: ${n} < ${minSamples}`);
    // Condition: centre on the centroid, scale by the RMS distance from it; work with averages.
    const centred = Float64Array.from(moments);
    const meanU = centred[1]! / n;
    const meanV = centred[2]! / n;
    shiftMoments(centred, -meanU, -meanV, scratch);
    const scale = Math.sqrt((centred[3]! + centred[5]!) / n);
    if (!(scale > 0) || !Number.isFinite(scale)) {
      return fail('degenerate', 'all samples at one point: no modulation');
    }
    for (let i = 0; i <= 4; i++) {
      for (let j = 0; i + j <= 4; j++) centred[momentIndex(i, j)] = centred[momentIndex(i, j)]! / (n * scale ** (i + j));
    }
    const average = (i: number, j: number): number => centred[momentIndex(i, j)]!;
    for (let row = 0; row < 5; row++) {
      const [ri, rj] = FEATURES[row]!;
      for (let col = 0; col < 5; col++) {
        const [ci, cj] = FEATURES[col]!;
        matrix[row * 5 + col] = average(ri + ci, rj + cj);
      }
      rhs[row] = average(ri, rj);
    }
    if (!solve5(matrix, rhs)) {
      return fail('degenerate', 'samples on a line or a point: singular fit');
    }
    const conic: Conic = { A: rhs[0]!, B: rhs[1]!, C: rhs[2]!, D: rhs[3]!, E: rhs[4]! };
    const h = heydemannFromConic(conic);
    if (h === null) {
      return fail(
        'not-an-ellipse',
        'not an ellipse: too little of the figure covered, or not quadrature',
      );
    }

    const cosAlpha = Math.cos(h.alphaRad);
    // r² − 1 = λ·(conic(a, b) − 1) with λ = 1/(A R² cos²α): both vanish on the ellipse and share the a² term.
    // E[(conic − 1)²] = θᵀMθ − 2θᵀb + 1 over the same averages; θ = rhs holds the solution.
    let quadratic = 1;
    for (let row = 0; row < 5; row++) {
      const [ri, rj] = FEATURES[row]!;
      quadratic -= 2 * rhs[row]! * average(ri, rj);
      for (let col = 0; col < 5; col++) {
        const [ci, cj] = FEATURES[col]!;
        quadratic += rhs[row]! * rhs[col]! * average(ri + ci, rj + cj);
      }
    }
    const lambda = 1 / (conic.A * h.R * h.R * cosAlpha * cosAlpha);
    const residualRms = (Math.abs(lambda) * Math.sqrt(Math.max(0, quadratic))) / 2;

    const calibration = fromHeydemann({
      p: shiftX + meanU + scale * h.p,
      q: shiftY + meanV + scale * h.q,
      R: scale * h.R,
      G: h.G,
      alphaRad: h.alphaRad,
    });
    return acceptFit(
      { calibration, residualRms, samples: n, conic, frame: { centreX: shiftX + meanU, centreY: shiftY + meanV, scale } },
      coverageOfFit(state(), calibration),
      limits,
    );
  }

  function state(): EllipseAccumulator['state'] {
    return { shiftX, shiftY, moments, occupancy, gridHalfWidth };
  }

  function reset(): void {
    moments.fill(0);
    occupancy.fill(0);
    gridHalfWidth = 0;
    hasShift = false;
    shiftX = 0;
    shiftY = 0;
    skippedNonFinite = 0;
  }

  reset();
  return {
    add,
    merge,
    reset,
    solve,
    get samples() {
      return moments[0]!;
    },
    get skippedNonFinite() {
      return skippedNonFinite;
    },
    get state() {
      return state();
    },
  };
}
