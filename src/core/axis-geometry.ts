// Angles of a moving body and the displacement of a point of interest from several parallel interferometer axes
// (common practice: differential and multi-axis plane-mirror setups; the Abbe error h·θ after Bryan, Precision
// Engineering 1(3), 1979, memory). Each axis reads the displacement, along the common beam direction z, of the
// body's reflecting plane where its beam meets it, at the beam's lateral place (x, y). Second-order optical effects
// of the tilt inside the interferometers (beam walk, cosine terms of the optics) are outside this model.
//
// Rigid-body convention: the body turns by R = R_y(ψ)·R_x(θ), yaw ψ about +y and pitch θ about +x (right-handed,
// radians), and moves by d along z; its mirror plane passes through the frame origin at rest. The plane it then
// presents is z = d + a x + b y with a = −tan ψ and b = tan θ / cos ψ, so for small angles axis k reads
// z_k ≈ d − ψ x_k + θ y_k. A material point P = (x_P, y_P, z_P) of the body moves along z by
// d − x_P sin ψ + y_P cos ψ sin θ + z_P (cos ψ cos θ − 1), for small angles d − ψ x_P + θ y_P (its Abbe offsets
// times the angles).

import { finiteNumber, integerInRange, OptionError, oneOf } from './options.js';

export interface BeamPlacement {
  /** Lateral place of the beam, m, across the direction of motion: x (yaw lever) and y (pitch lever). Finite. */
  readonly xM: number;
  readonly yM: number;
  /** Standard uncertainty of the axis reading, m; default 0 (finite, ≥ 0). */
  readonly readingUncertaintyM?: number;
  /** Standard uncertainty of the beam's lateral place, m, in x and in y; default 0. */
  readonly placementUncertaintyM?: number;
}

export interface PointOfInterest {
  /** Place of the point in the body frame at rest, m: lateral x, y (Abbe offsets) and z along the motion from the mirror plane. */
  readonly xM: number;
  readonly yM: number;
  readonly zM?: number;
  /** Standard uncertainty of each of its coordinates, m; default 0. */
  readonly uncertaintyM?: number;
}

export type AngleModel = 'exact' | 'small-angle';

export interface AxisGeometryOptions {
  /**
   * The beams, 2..8. Two beams give one angle: they must differ in x only (yaw) or in y only (pitch). Three or more
   * not on one line give both, by least squares beyond three.
   */
  readonly beams: readonly BeamPlacement[];
  /** The point whose displacement is wanted; default the frame origin (x = y = z = 0). */
  readonly pointOfInterest?: PointOfInterest;
  /** `exact` (the rigid-body formulas above; default) or `small-angle` (linear in the angles). */
  readonly model?: AngleModel;
}

export interface AxisGeometryOutput {
  /** Yaw ψ and pitch θ, rad; NaN for an angle the beams do not measure (pitch of two beams along x, and yaw along y). */
  readonly yawRad: Float64Array;
  readonly pitchRad: Float64Array;
  /** Displacement of the point of interest along z, m. */
  readonly pointM: Float64Array;
  /** Combined standard uncertainties (GUM law of propagation, inputs uncorrelated, to first order in the angles). */
  readonly yawUncertaintyRad: Float64Array;
  readonly pitchUncertaintyRad: Float64Array;
  readonly pointUncertaintyM: Float64Array;
}

export interface AxisGeometry {
  readonly beams: number;
  /** Which angles these beams measure. */
  readonly measures: { readonly yaw: boolean; readonly pitch: boolean };
  /**
   * From the readings of every beam (readingsM[k][i]: beam k, sample i, m) writes angles, point displacement and
   * uncertainties for `length` samples into `output`. Allocates nothing; returns `length`.
   */
  process(readingsM: readonly ArrayLike<number>[], output: AxisGeometryOutput, length: number): number;
  /** The same for one sample; `out` receives the six values in the order of AxisGeometryOutput. */
  solve(readingsM: ArrayLike<number>, out: Float64Array): void;
}

export function createAxisGeometry(options: AxisGeometryOptions): AxisGeometry {
  const count = integerInRange('beams.length', options.beams.length, 2, 8);
  const model = oneOf('model', options.model ?? 'exact', ['exact', 'small-angle'] as const);
  const xs = new Float64Array(count);
  const ys = new Float64Array(count);
  const uReading = new Float64Array(count);
  const uPlace = new Float64Array(count);
  options.beams.forEach((beam, k) => {
    xs[k] = finiteNumber(`beams[${k}].xM`, beam.xM);
    ys[k] = finiteNumber(`beams[${k}].yM`, beam.yM);
    uReading[k] = nonNegative(`beams[${k}].readingUncertaintyM`, beam.readingUncertaintyM ?? 0);
    uPlace[k] = nonNegative(`beams[${k}].placementUncertaintyM`, beam.placementUncertaintyM ?? 0);
  });
  const poi = options.pointOfInterest ?? { xM: 0, yM: 0 };
  const px = finiteNumber('pointOfInterest.xM', poi.xM);
  const py = finiteNumber('pointOfInterest.yM', poi.yM);
  const pz = finiteNumber('pointOfInterest.zM', poi.zM ?? 0);
  const uPoint = nonNegative('pointOfInterest.uncertaintyM', poi.uncertaintyM ?? 0);

  // Least-squares plane z = c + a x + b y: (c, a, b) = W z with W = (AᵀA)⁻¹Aᵀ, computed once. Two beams fit the line
  // along the direction they span and leave the other slope out.
  let xMin = Infinity, xMax = -Infinity, yMin = Infinity, yMax = -Infinity;
  for (let k = 0; k < count; k++) {
    xMin = Math.min(xMin, xs[k]!);
    xMax = Math.max(xMax, xs[k]!);
    yMin = Math.min(yMin, ys[k]!);
    yMax = Math.max(yMax, ys[k]!);
  }
  const spanX = xMax - xMin;
  const spanY = yMax - yMin;
  let yaw = true;
  let pitch = true;
  if (count === 2) {
    if (spanX > 0 && spanY === 0) pitch = false;
    else if (spanY > 0 && spanX === 0) yaw = false;
    else throw new OptionError('beams', 'two beams apart in x only (yaw) or in y only (pitch)', options.beams.map((b) => [b.xM, b.yM]));
  }
  const columns = 1 + (yaw ? 1 : 0) + (pitch ? 1 : 0);
  // Centre the lever arms so that the normal equations stay well conditioned for beams far from the origin.
  let cx = 0, cy = 0;
  for (let k = 0; k < count; k++) {
    cx += xs[k]! / count;
    cy += ys[k]! / count;
  }
  const design = (k: number, j: number) => (j === 0 ? 1 : j === 1 && yaw ? xs[k]! - cx : ys[k]! - cy);
  const normal = new Float64Array(9);
  for (let i = 0; i < columns; i++) for (let j = 0; j < columns; j++) for (let k = 0; k < count; k++) normal[i * 3 + j] += design(k, i) * design(k, j);
  const inverse = invert(normal, columns);
  if (inverse === null) throw new OptionError('beams', 'beams not all on one line (three or more give yaw and pitch)', options.beams.map((b) => [b.xM, b.yM]));
  // Rows of W for the centred intercept, a and b (b or a zero when not measured).
  const wc = new Float64Array(count);
  const wa = new Float64Array(count);
  const wb = new Float64Array(count);
  for (let k = 0; k < count; k++) {
    for (let j = 0; j < columns; j++) {
      const row0 = inverse[0 * 3 + j]! * design(k, j);
      wc[k] += row0;
      if (yaw) wa[k] += inverse[1 * 3 + j]! * design(k, j);
      if (pitch) wb[k] += inverse[(yaw ? 2 : 1) * 3 + j]! * design(k, j);
    }
  }
  // Weights of the point of interest to first order: z_P ≈ c + a (x_P − cx) + b (y_P − cy), c the centred intercept.
  const wp = new Float64Array(count);
  for (let k = 0; k < count; k++) wp[k] = wc[k]! + wa[k]! * (px - cx) + wb[k]! * (py - cy);
  const exact = model === 'exact';

  const z = new Float64Array(count);
  const result = new Float64Array(6);

  /** Solves the readings in `z` into `result` (the order of AxisGeometryOutput). */
  function solveCore(): void {
    // Slopes from the readings about their mean (the slope weights sum to zero): a pure translation gives exactly 0.
    let mean = 0;
    for (let k = 0; k < count; k++) mean += z[k]!;
    mean /= count;
    let c = 0, a = 0, b = 0;
    for (let k = 0; k < count; k++) {
      const dz = z[k]! - mean;
      c += wc[k]! * dz;
      a += wa[k]! * dz;
      b += wb[k]! * dz;
    }
    c += mean;
    const d = c - a * cx - b * cy; // the plane's height at the frame origin
    let psi: number, theta: number, point: number;
    if (exact) {
      psi = -Math.atan(a);
      theta = Math.atan(b * Math.cos(psi));
      point = d - px * Math.sin(psi) + py * Math.cos(psi) * Math.sin(theta) + pz * (Math.cos(psi) * Math.cos(theta) - 1);
    } else {
      psi = -a;
      theta = b;
      point = d + a * px + b * py;
    }
    // Uncertainty: each beam's reading, plus its misplacement, which reads like a reading error of slope × shift.
    let ua = 0, ub = 0, up = 0;
    const slope2 = a * a + b * b;
    for (let k = 0; k < count; k++) {
      const u2 = uReading[k]! * uReading[k]! + slope2 * uPlace[k]! * uPlace[k]!;
      ua += wa[k]! * wa[k]! * u2;
      ub += wb[k]! * wb[k]! * u2;
      up += wp[k]! * wp[k]! * u2;
    }
    up += slope2 * uPoint * uPoint;
    result[0] = yaw ? psi : Number.NaN;
    result[1] = pitch ? theta : Number.NaN;
    result[2] = point;
    result[3] = yaw ? Math.sqrt(ua) : Number.NaN;
    result[4] = pitch ? Math.sqrt(ub) : Number.NaN;
    result[5] = Math.sqrt(up);
  }

  return {
    beams: count,
    measures: { yaw, pitch },
    process(readingsM, output, length) {
      if (readingsM.length !== count) throw new OptionError('readingsM.length', `one array per beam (${count})`, readingsM.length);
      for (let i = 0; i < length; i++) {
        for (let k = 0; k < count; k++) z[k] = readingsM[k]![i]!;
        solveCore();
        output.yawRad[i] = result[0]!;
        output.pitchRad[i] = result[1]!;
        output.pointM[i] = result[2]!;
        output.yawUncertaintyRad[i] = result[3]!;
        output.pitchUncertaintyRad[i] = result[4]!;
        output.pointUncertaintyM[i] = result[5]!;
      }
      return length;
    },
    solve(readingsM, out) {
      for (let k = 0; k < count; k++) z[k] = readingsM[k]!;
      solveCore();
      out.set(result);
    },
  };
}

function nonNegative(option: string, value: number): number {
  if (!(finiteNumber(option, value) >= 0)) throw new OptionError(option, 'a finite number ≥ 0', value);
  return value;
}

/** Inverse of the leading n×n block (n ≤ 3) of a 3×3 row-major matrix by Gauss–Jordan; null when singular. */
function invert(matrix: Float64Array, n: number): Float64Array | null {
  const a = Float64Array.from(matrix);
  const inv = new Float64Array(9);
  for (let i = 0; i < n; i++) inv[i * 3 + i] = 1;
  let scale = 0;
  for (let i = 0; i < n; i++) scale = Math.max(scale, Math.abs(a[i * 3 + i]!));
  for (let col = 0; col < n; col++) {
    let pivot = col;
    for (let r = col + 1; r < n; r++) if (Math.abs(a[r * 3 + col]!) > Math.abs(a[pivot * 3 + col]!)) pivot = r;
    if (!(Math.abs(a[pivot * 3 + col]!) > 1e-12 * scale)) return null;
    for (let j = 0; j < 3; j++) {
      [a[col * 3 + j], a[pivot * 3 + j]] = [a[pivot * 3 + j]!, a[col * 3 + j]!];
      [inv[col * 3 + j], inv[pivot * 3 + j]] = [inv[pivot * 3 + j]!, inv[col * 3 + j]!];
    }
    const p = a[col * 3 + col]!;
    for (let j = 0; j < 3; j++) {
      a[col * 3 + j] = a[col * 3 + j]! / p;
      inv[col * 3 + j] = inv[col * 3 + j]! / p;
    }
    for (let r = 0; r < n; r++) {
      if (r === col) continue;
      const f = a[r * 3 + col]!;
      for (let j = 0; j < 3; j++) {
        a[r * 3 + j] = a[r * 3 + j]! - f * a[col * 3 + j]!;
        inv[r * 3 + j] = inv[r * 3 + j]! - f * inv[col * 3 + j]!;
      }
    }
  }
  return inv;
}
