// Combined standard uncertainty of a displacement reading by the GUM law of propagation of uncertainty
// (JCGM 100:2008, eq. (10), with the second-order term of its note to 5.1.2 for the thermal product α·(T − 20)).
import { OptionError, finiteNumber, numberInRange, positiveFinite } from '../options.js';
import {
  airIndexSensitivities,
  refractiveIndexOfAir,
  type AirIndexOptions,
  type ValidityWarning,
} from './air-index.js';
import { REFERENCE_TEMPERATURE_C, lengthAtReferenceTemperatureM } from './thermal.js';

export interface MaterialCorrection {
  /** Linear expansion coefficient, 1/K. */
  readonly expansionPerK: number;
  /** Material temperature during the measurement, °C. */
  readonly temperatureC: number;
}

export interface DeadPathCorrection {
  /** Unmeasured path at the datum, m. */
  readonly deadPathM: number;
  /** n_now − n_datum: the change of the air index since the datum was set. */
  readonly indexChangeSinceDatum: number;
}

export interface LengthCorrectionOptions {
  /** Reading compensated with the current air index `indexNow`, m. */
  readonly lengthM: number;
  readonly indexNow: number;
  /** Normalise to 20 °C; omitted: no thermal normalisation. */
  readonly material?: MaterialCorrection;
  /** Correct the dead path; omitted: no dead-path correction. */
  readonly deadPath?: DeadPathCorrection;
}

export interface CorrectedLength {
  /** The reading normalised to 20 °C and corrected for the dead path, m. */
  readonly correctedLengthM: number;
  /** L20 − L, m. */
  readonly thermalCorrectionM: number;
  /** −D Δn / n, m. */
  readonly deadPathCorrectionM: number;
}

/**
 * The measurement model of the uncertainty budget, y = L / (1 + α (T − 20)) − D Δn / n: the material normalisation
 * applies to the measured displacement, the dead-path term to the unmeasured path, which is not part of the part.
 */
export function correctLength(options: LengthCorrectionOptions): CorrectedLength {
  const lengthM = finiteNumber('lengthM', options.lengthM);
  const indexNow = positiveFinite('indexNow', options.indexNow);
  const normalisedM =
    options.material === undefined
      ? lengthM
      : lengthAtReferenceTemperatureM({
          lengthM,
          materialTemperatureC: finiteNumber('material.temperatureC', options.material.temperatureC),
          expansionPerK: numberInRange('material.expansionPerK', options.material.expansionPerK, -1e-4, 1e-4),
        });
  let deadPathCorrection = 0;
  if (options.deadPath !== undefined) {
    const deadPathM = finiteNumber('deadPath.deadPathM', options.deadPath.deadPathM);
    if (deadPathM < 0) throw new OptionError('deadPath.deadPathM', 'a finite number ≥ 0', deadPathM);
    const change = finiteNumber('deadPath.indexChangeSinceDatum', options.deadPath.indexChangeSinceDatum);
    deadPathCorrection = (-deadPathM * change) / indexNow;
  }
  return {
    correctedLengthM: normalisedM + deadPathCorrection,
    thermalCorrectionM: normalisedM - lengthM,
    deadPathCorrectionM: deadPathCorrection,
  };
}

export interface ReadingUncertaintyOptions {
  /** Displacement reading compensated with the index of `air`, m. */
  readonly lengthM: number;
  /** The air conditions and equation the reading was compensated with. */
  readonly air: AirIndexOptions;
  /** Relative standard uncertainty of the vacuum wavelength (1.5e-6 unstabilised He-Ne, CIPM 2007). */
  readonly wavelengthRelativeUncertainty: number;
  /** Standard uncertainty of the index equation itself (dimensionless). */
  readonly indexEquationUncertainty: number;
  /** Standard uncertainty of the air-temperature sensor, K. */
  readonly airTemperatureUncertaintyK: number;
  /** Standard uncertainty of the pressure sensor, Pa. */
  readonly pressureUncertaintyPa: number;
  /** Standard uncertainty of the humidity sensor in the unit of the humidity given in `air`: %, K (dew point) or Pa. */
  readonly humidityUncertainty: number;
  /** Standard uncertainty of the CO2 mole fraction, µmol/mol. Default 0 (no row). */
  readonly co2UncertaintyPpm?: number;
  /** Peak amplitude of the periodic (non-linearity) error left after correction, m; its standard uncertainty is a/√2. */
  readonly periodicResidualAmplitudeM: number;
  /** Thermal normalisation to 20 °C with its uncertainties; omitted: no normalisation, no rows. */
  readonly material?: MaterialCorrection & {
    /** Standard uncertainty of the expansion coefficient, 1/K. */
    readonly expansionUncertaintyPerK: number;
    /** Standard uncertainty of the material temperature, K. */
    readonly temperatureUncertaintyK: number;
  };
  /** Dead-path correction with its uncertainties; omitted: no correction, no rows. */
  readonly deadPath?: DeadPathCorrection & {
    /** Standard uncertainty of the dead path length, m. */
    readonly deadPathUncertaintyM: number;
    /** Standard uncertainty of the index change since the datum (dimensionless). */
    readonly indexChangeUncertainty: number;
  };
  /** Coverage factor for the expanded uncertainty. Default 2. */
  readonly coverageFactor?: number;
}

/** One row of the budget: u_i(y) = |c_i| u(x_i). */
export interface UncertaintyContribution {
  readonly name: string;
  /** Standard uncertainty of the input quantity, in `unit`. */
  readonly standardUncertainty: number;
  readonly unit: string;
  /** Sensitivity coefficient c_i = ∂y/∂x_i, in `sensitivityUnit`. */
  readonly sensitivity: number;
  readonly sensitivityUnit: string;
  /** |c_i| u(x_i), m. */
  readonly contributionM: number;
}

export interface UncertaintyBudget {
  readonly lengthM: number;
  readonly correctedLengthM: number;
  readonly refractiveIndex: number;
  readonly contributions: readonly UncertaintyContribution[];
  /** u_c(y) = √Σ u_i², the inputs taken as uncorrelated, m. */
  readonly combinedStandardUncertaintyM: number;
  readonly coverageFactor: number;
  /** k · u_c(y), m. */
  readonly expandedUncertaintyM: number;
  /** Validity warnings of the index equation at the stated conditions. */
  readonly warnings: readonly ValidityWarning[];
}

const HUMIDITY_ROW_NAMES = {
  relativeHumidityPct: 'relative humidity',
  dewPointC: 'dew point',
  vapourPressurePa: 'water-vapour pressure',
} as const;

export function readingUncertaintyBudget(options: ReadingUncertaintyOptions): UncertaintyBudget {
  const lengthM = finiteNumber('lengthM', options.lengthM);
  const index = refractiveIndexOfAir(options.air);
  const slopes = airIndexSensitivities(options.air);
  const n = index.n;
  const corrected = correctLength({
    lengthM,
    indexNow: n,
    ...(options.material === undefined ? {} : { material: options.material }),
    ...(options.deadPath === undefined ? {} : { deadPath: options.deadPath }),
  });
  const coverageFactor = positiveFinite('coverageFactor', options.coverageFactor ?? 2);

  // The reading scales as λ_vac / n; after normalisation the scaled part is L / (1 + α θ).
  const theta = options.material === undefined ? 0 : options.material.temperatureC - REFERENCE_TEMPERATURE_C;
  const alpha = options.material === undefined ? 0 : options.material.expansionPerK;
  const growth = 1 + alpha * theta;
  const scaledM = lengthM / growth;
  const perIndex = -scaledM / n;

  const rows: UncertaintyContribution[] = [];
  const add = (name: string, u: number, unit: string, sensitivity: number, sensitivityUnit: string): void => {
    rows.push({ name, standardUncertainty: u, unit, sensitivity, sensitivityUnit, contributionM: Math.abs(sensitivity) * u });
  };
  const uncertainty = (option: string, value: unknown): number => {
    const u = finiteNumber(option, value);
    if (u < 0) throw new OptionError(option, 'a standard uncertainty ≥ 0', u);
    return u;
  };

  add(
    'vacuum wavelength',
    uncertainty('wavelengthRelativeUncertainty', options.wavelengthRelativeUncertainty) * index.vacuumWavelengthM,
    'm',
    scaledM / index.vacuumWavelengthM,
    'm/m',
  );
  add('index equation', uncertainty('indexEquationUncertainty', options.indexEquationUncertainty), '1', perIndex, 'm');
  add('air temperature', uncertainty('airTemperatureUncertaintyK', options.airTemperatureUncertaintyK), 'K', perIndex * slopes.perKelvin, 'm/K');
  add('air pressure', uncertainty('pressureUncertaintyPa', options.pressureUncertaintyPa), 'Pa', perIndex * slopes.perPascal, 'm/Pa');
  add(
    HUMIDITY_ROW_NAMES[slopes.humidityQuantity],
    uncertainty('humidityUncertainty', options.humidityUncertainty),
    slopes.humidityUnit,
    perIndex * slopes.perHumidityUnit,
    `m/${slopes.humidityUnit}`,
  );
  if (options.co2UncertaintyPpm !== undefined) {
    add('CO2 mole fraction', uncertainty('co2UncertaintyPpm', options.co2UncertaintyPpm), 'µmol/mol', perIndex * slopes.perCo2Ppm, 'm/(µmol/mol)');
  }
  if (options.material !== undefined) {
    const uAlpha = uncertainty('material.expansionUncertaintyPerK', options.material.expansionUncertaintyPerK);
    const uTemperature = uncertainty('material.temperatureUncertaintyK', options.material.temperatureUncertaintyK);
    add('expansion coefficient', uAlpha, '1/K', (-lengthM * theta) / (growth * growth), 'm·K');
    add('material temperature', uTemperature, 'K', (-lengthM * alpha) / (growth * growth), 'm/K');
    // Near 20 °C the first-order α term vanishes while the product α·θ is still uncertain: GUM 5.1.2 note.
    add(
      'expansion coefficient × material temperature (second order)',
      uAlpha * uTemperature,
      '1',
      (-lengthM * (1 - alpha * theta)) / (growth * growth * growth),
      'm',
    );
  }
  if (options.deadPath !== undefined) {
    add(
      'dead path length',
      uncertainty('deadPath.deadPathUncertaintyM', options.deadPath.deadPathUncertaintyM),
      'm',
      -options.deadPath.indexChangeSinceDatum / n,
      'm/m',
    );
    add(
      'index change since datum',
      uncertainty('deadPath.indexChangeUncertainty', options.deadPath.indexChangeUncertainty),
      '1',
      -options.deadPath.deadPathM / n,
      'm',
    );
  }
  // A sinusoid of peak a has an arcsine distribution with standard deviation a/√2.
  add(
    'periodic error residual',
    uncertainty('periodicResidualAmplitudeM', options.periodicResidualAmplitudeM) / Math.SQRT2,
    'm',
    1,
    'm/m',
  );

  let sumOfSquares = 0;
  for (const row of rows) sumOfSquares += row.contributionM * row.contributionM;
  const combined = Math.sqrt(sumOfSquares);
  return {
    lengthM,
    correctedLengthM: corrected.correctedLengthM,
    refractiveIndex: n,
    contributions: rows,
    combinedStandardUncertaintyM: combined,
    coverageFactor,
    expandedUncertaintyM: coverageFactor * combined,
    warnings: index.warnings,
  };
}
