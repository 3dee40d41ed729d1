// The ellipse of a pair of quadrature signals: the calibration record, Heydemann's parameters and his closed form
// from a fitted conic, and the result every fit returns. P. L. M. Heydemann, Applied Optics 20(19), 3382-3384 (1981).

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
      /** The ellipse that was refused, when one was solved ('implausible'). */
      readonly calibration?: EllipseCalibration;
    };

