// Refractive index of air from temperature, pressure, humidity, CO2 and vacuum wavelength: Ciddor (1996), the
// Edlén equation as updated by Birch & Downs (1993, 1994) with the water-vapour term of Stone & Zimmerman (NIST),
// and the NIST shop-floor formula. Each equation reports inputs outside its stated validity range.
import { OptionError, finiteNumber, numberInRange, oneOf, positiveFinite } from '../options.js';
import {
  saturationTemperatureRangeC,
  saturationVapourPressurePa,
  unvalidatedSaturationVapourPressurePa,
} from './vapour-pressure.js';

export type AirIndexEquation = 'ciddor' | 'edlen' | 'shopfloor';
export const airIndexEquations: readonly AirIndexEquation[] = ['ciddor', 'edlen', 'shopfloor'];

export const airIndexEquationNames: Readonly<Record<AirIndexEquation, string>> = {
  ciddor: 'Ciddor 1996',
  edlen: 'modified Edlén (Birch & Downs 1993/1994, NIST water-vapour term)',
  shopfloor: 'NIST shop-floor formula (He-Ne 633 nm)',
};

/** The state of the air. Give exactly one of `relativeHumidityPct`, `dewPointC`, `vapourPressurePa`. */
export interface AirConditions {
  /** Air temperature, °C (ITS-90). Required. */
  readonly temperatureC: number;
  /** Total air pressure, Pa. Required, > 0. */
  readonly pressurePa: number;
  /** Relative humidity with respect to water (ice below 0 °C), %, 0..100. */
  readonly relativeHumidityPct?: number;
  /** Dew point (frost point below 0 °C), °C, at most the air temperature. */
  readonly dewPointC?: number;
  /** Partial pressure of water vapour, Pa, 0..saturation. */
  readonly vapourPressurePa?: number;
  /** CO2 mole fraction, µmol/mol (ppm). Default 450, the reference content of Birch & Downs and Ciddor. */
  readonly co2Ppm?: number;
  /** Vacuum wavelength of the laser, m. Required. */
  readonly vacuumWavelengthM: number;
}

export interface AirIndexOptions extends AirConditions {
  /** Which equation. Default `'ciddor'` (the NIST toolbox's general recommendation). */
  readonly equation?: AirIndexEquation;
  /**
   * What to do with an input outside the equation's stated validity range: `'warn'` (default) returns the value with
   * a warning; `'error'` throws. Inputs where the equation has no meaning (negative pressure, RH above 100 %,
   * dew point above the air temperature...) always throw.
   */
  readonly outOfRange?: 'warn' | 'error';
}

export type AirQuantity = 'temperatureC' | 'pressurePa' | 'relativeHumidityPct' | 'co2Ppm' | 'vacuumWavelengthM';

/** An input outside the range over which an equation's stated uncertainty holds. */
export interface ValidityWarning {
  readonly quantity: AirQuantity;
  readonly value: number;
  readonly min: number;
  readonly max: number;
  /** Unit of `value`, `min` and `max`. */
  readonly unit: string;
  readonly message: string;
}

export interface ValidityRange {
  readonly min: number;
  readonly max: number;
  readonly unit: string;
}

/** Stated validity ranges per equation; see docs/metrology.md for their sources. */
export const airIndexValidity: Readonly<Record<AirIndexEquation, Readonly<Record<AirQuantity, ValidityRange>>>> = {
  ciddor: {
    temperatureC: { min: -40, max: 100, unit: '°C' },
    pressurePa: { min: 80_000, max: 120_000, unit: 'Pa' },
    relativeHumidityPct: { min: 0, max: 100, unit: '%' },
    co2Ppm: { min: 0, max: 2000, unit: 'µmol/mol' },
    vacuumWavelengthM: { min: 300e-9, max: 1690e-9, unit: 'm' },
  },
  // Derived, not stated by the papers: the visible-light box inside Ciddor's range where the two equations agree
  // within 4e-8 (docs/metrology.md; checked in tests/metrology/air-index.test.ts).
  edlen: {
    temperatureC: { min: 0, max: 40, unit: '°C' },
    pressurePa: { min: 80_000, max: 120_000, unit: 'Pa' },
    relativeHumidityPct: { min: 0, max: 100, unit: '%' },
    co2Ppm: { min: 0, max: 2000, unit: 'µmol/mol' },
    vacuumWavelengthM: { min: 350e-9, max: 650e-9, unit: 'm' },
  },
  shopfloor: {
    temperatureC: { min: 15, max: 25, unit: '°C' },
    pressurePa: { min: 95_000, max: 105_000, unit: 'Pa' },
    relativeHumidityPct: { min: 0, max: 80, unit: '%' },
    // The formula has no CO2 term; ±100 µmol/mol around 450 changes n by at most 1.5e-8, inside its 5e-8 claim.
    co2Ppm: { min: 350, max: 550, unit: 'µmol/mol' },
    vacuumWavelengthM: { min: 632.5e-9, max: 633.5e-9, unit: 'm' },
  },
};

export interface AirIndexResult {
  readonly equation: AirIndexEquation;
  /** Phase refractive index of the air. */
  readonly n: number;
  readonly vacuumWavelengthM: number;
  /** λ_air = λ_vac / n, m. */
  readonly airWavelengthM: number;
  /** Partial pressure of water vapour used, Pa. */
  readonly vapourPressurePa: number;
  /** Relative humidity used, %. */
  readonly relativeHumidityPct: number;
  readonly co2Ppm: number;
  readonly warnings: readonly ValidityWarning[];
}

/** The equation when none is named: Ciddor 1996, the NIST toolbox's general recommendation. */
export const DEFAULT_AIR_INDEX_EQUATION: AirIndexEquation = 'ciddor';

/** CO2 mole fraction the index equations take when none is given, µmol/mol: the reference content of Birch & Downs and Ciddor. */
export const DEFAULT_CO2_PPM = 450;
const KELVIN_OFFSET = 273.15;
/** Below this the dispersion terms approach their poles (about 130 nm and 160 nm): no meaningful value. */
const MIN_WAVELENGTH_M = 200e-9;
/** Beyond this lie the infrared absorption bands that none of the fits describe; larger values are unit mistakes. */
const MAX_WAVELENGTH_M = 10e-6;

export type HumidityForm = 'relativeHumidityPct' | 'dewPointC' | 'vapourPressurePa';

/** Validated inputs in one flat record; the humidity stays in the form the user gave, for derivatives. */
interface ResolvedConditions {
  readonly equation: AirIndexEquation;
  readonly temperatureC: number;
  readonly pressurePa: number;
  readonly humidityForm: HumidityForm;
  readonly humidityValue: number;
  readonly co2Ppm: number;
  readonly vacuumWavelengthM: number;
}

/** The refractive index of air and the wavelength in air for the given conditions. */
export function refractiveIndexOfAir(options: AirIndexOptions): AirIndexResult {
  const resolved = resolveConditions(options);
  const outOfRange = oneOf('outOfRange', options.outOfRange ?? 'warn', ['warn', 'error'] as const);
  const vapourPressurePa = vapourPressureOf(resolved);
  // RH as given when given: the round trip through the vapour pressure turned 100 % into 100.00000000000001 %.
  const relativeHumidityPct =
    resolved.humidityForm === 'relativeHumidityPct'
      ? resolved.humidityValue
      : (100 * vapourPressurePa) / saturationVapourPressurePa(resolved.temperatureC);
  const warnings = validityWarnings(resolved, relativeHumidityPct);
  if (outOfRange === 'error' && warnings.length > 0) {
    const first = warnings[0] as ValidityWarning;
    throw new OptionError(
      first.quantity,
      `in [${first.min}, ${first.max}] ${first.unit}, the stated validity range of the ${airIndexEquationNames[resolved.equation]}`,
      first.value,
    );
  }
  const n = indexFor(resolved);
  return {
    equation: resolved.equation,
    n,
    vacuumWavelengthM: resolved.vacuumWavelengthM,
    airWavelengthM: resolved.vacuumWavelengthM / n,
    vapourPressurePa,
    relativeHumidityPct,
    co2Ppm: resolved.co2Ppm,
    warnings,
  };
}

/** Partial derivatives of n at the given conditions, by central differences through the chosen equation. */
export interface AirIndexSensitivities {
  /** ∂n/∂t at constant pressure, CO2 and the given humidity quantity, 1/K. */
  readonly perKelvin: number;
  /** ∂n/∂p, 1/Pa. */
  readonly perPascal: number;
  /** ∂n/∂(humidity quantity as given): 1/% for RH, 1/K for dew point, 1/Pa for vapour pressure. */
  readonly perHumidityUnit: number;
  /** Which humidity quantity `perHumidityUnit` refers to, and its unit. */
  readonly humidityQuantity: HumidityForm;
  readonly humidityUnit: '%' | 'K' | 'Pa';
  /** ∂n/∂x_CO2, 1/(µmol/mol); zero for the shop-floor formula, which has no CO2 term. */
  readonly perCo2Ppm: number;
}

const HUMIDITY_UNITS: Readonly<Record<HumidityForm, '%' | 'K' | 'Pa'>> = {
  relativeHumidityPct: '%',
  dewPointC: 'K',
  vapourPressurePa: 'Pa',
};
/** Steps for the central differences: small against the inputs' scales, large against rounding of n (1e-16). */
const STEP_TEMPERATURE_K = 0.01;
const STEP_PRESSURE_PA = 1;
const STEP_HUMIDITY: Readonly<Record<HumidityForm, number>> = {
  relativeHumidityPct: 0.1,
  dewPointC: 0.01,
  vapourPressurePa: 1,
};
const STEP_CO2_PPM = 1;

export function airIndexSensitivities(options: AirIndexOptions): AirIndexSensitivities {
  const base = resolveConditions(options);
  const slope = (change: (step: number) => ResolvedConditions, step: number): number =>
    (indexFor(change(step)) - indexFor(change(-step))) / (2 * step);
  return {
    perKelvin: slope((h) => ({ ...base, temperatureC: base.temperatureC + h }), STEP_TEMPERATURE_K),
    perPascal: slope((h) => ({ ...base, pressurePa: base.pressurePa + h }), STEP_PRESSURE_PA),
    perHumidityUnit: slope(
      (h) => ({ ...base, humidityValue: base.humidityValue + h }),
      STEP_HUMIDITY[base.humidityForm],
    ),
    humidityQuantity: base.humidityForm,
    humidityUnit: HUMIDITY_UNITS[base.humidityForm],
    perCo2Ppm: slope((h) => ({ ...base, co2Ppm: base.co2Ppm + h }), STEP_CO2_PPM),
  };
}

function resolveConditions(options: AirIndexOptions): ResolvedConditions {
  const equation = oneOf('equation', options.equation ?? DEFAULT_AIR_INDEX_EQUATION, airIndexEquations);
  const temperatureC = finiteNumber('temperatureC', options.temperatureC);
  const saturationPa = saturationVapourPressurePa(temperatureC);
  const pressurePa = positiveFinite('pressurePa', options.pressurePa);
  const co2Ppm = numberInRange('co2Ppm', options.co2Ppm ?? DEFAULT_CO2_PPM, 0, 1e6);
  const vacuumWavelengthM = positiveFinite('vacuumWavelengthM', options.vacuumWavelengthM);
  if (vacuumWavelengthM < MIN_WAVELENGTH_M || vacuumWavelengthM > MAX_WAVELENGTH_M) {
    throw new OptionError(
      'vacuumWavelengthM',
      'in [2e-7, 1e-5] m (200 nm to 10 µm, in metres): the dispersion terms diverge below, absorption bands lie above',
      vacuumWavelengthM,
    );
  }
  if (equation === 'shopfloor') {
    const range = airIndexValidity.shopfloor.vacuumWavelengthM;
    // The formula's constant is fitted at one wavelength: anywhere else it is wrong by parts in 1e6, not a warning.
    if (vacuumWavelengthM < range.min || vacuumWavelengthM > range.max) {
      throw new OptionError(
        'vacuumWavelengthM',
        `in [${range.min}, ${range.max}] m for the shop-floor formula, which holds only for He-Ne 633 nm (use ciddor or edlen)`,
        vacuumWavelengthM,
      );
    }
  }
  const given = (['relativeHumidityPct', 'dewPointC', 'vapourPressurePa'] as const).filter(
    (form) => options[form] !== undefined,
  );
  if (given.length !== 1) {
    throw new OptionError(
      'humidity',
      'given exactly once, as relativeHumidityPct, dewPointC or vapourPressurePa',
      given.length === 0 ? 'none' : given.join(' and '),
    );
  }
  const humidityForm = given[0] as HumidityForm;
  let humidityValue: number;
  if (humidityForm === 'relativeHumidityPct') {
    humidityValue = numberInRange('relativeHumidityPct', options.relativeHumidityPct, 0, 100);
  } else if (humidityForm === 'dewPointC') {
    humidityValue = finiteNumber('dewPointC', options.dewPointC);
    if (humidityValue > temperatureC) {
      throw new OptionError('dewPointC', `at most the air temperature ${temperatureC} °C (air cannot be supersaturated)`, humidityValue);
    }
    if (humidityValue < saturationTemperatureRangeC.min) {
      throw new OptionError('dewPointC', `at least ${saturationTemperatureRangeC.min} °C, the end of the sublimation equation`, humidityValue);
    }
  } else {
    humidityValue = numberInRange('vapourPressurePa', options.vapourPressurePa, 0, saturationPa);
  }
  const resolved: ResolvedConditions = {
    equation,
    temperatureC,
    pressurePa,
    humidityForm,
    humidityValue,
    co2Ppm,
    vacuumWavelengthM,
  };
  const vapourPa = vapourPressureOf(resolved);
  if (vapourPa >= pressurePa) {
    throw new OptionError('pressurePa', `above the water-vapour partial pressure ${vapourPa} Pa`, pressurePa);
  }
  return resolved;
}

function vapourPressureOf(conditions: ResolvedConditions): number {
  switch (conditions.humidityForm) {
    case 'relativeHumidityPct':
      return (conditions.humidityValue / 100) * unvalidatedSaturationVapourPressurePa(conditions.temperatureC);
    case 'dewPointC':
      return unvalidatedSaturationVapourPressurePa(conditions.humidityValue);
    case 'vapourPressurePa':
      return conditions.humidityValue;
  }
}

function validityWarnings(conditions: ResolvedConditions, relativeHumidityPct: number): ValidityWarning[] {
  const ranges = airIndexValidity[conditions.equation];
  const values: Readonly<Record<AirQuantity, number>> = {
    temperatureC: conditions.temperatureC,
    pressurePa: conditions.pressurePa,
    relativeHumidityPct,
    co2Ppm: conditions.co2Ppm,
    vacuumWavelengthM: conditions.vacuumWavelengthM,
  };
  const warnings: ValidityWarning[] = [];
  for (const quantity of Object.keys(ranges) as AirQuantity[]) {
    const range = ranges[quantity];
    const value = values[quantity];
    if (value >= range.min && value <= range.max) continue;
    warnings.push({
      quantity,
      value,
      min: range.min,
      max: range.max,
      unit: range.unit,
      message:
        `${quantity} = ${value} ${range.unit} is outside the stated validity range of the ` +
        `${airIndexEquationNames[conditions.equation]} (${range.min} to ${range.max} ${range.unit}): ` +
        'the index may be less accurate than the equation claims',
    });
  }
  return warnings;
}

function indexFor(conditions: ResolvedConditions): number {
  const pv = vapourPressureOf(conditions);
  const { temperatureC: t, pressurePa: p, co2Ppm, vacuumWavelengthM } = conditions;
  switch (conditions.equation) {
    case 'ciddor':
      return ciddorIndex(t, p, pv, co2Ppm, vacuumWavelengthM);
    case 'edlen':
      return edlenIndex(t, p, pv, co2Ppm, vacuumWavelengthM);
    case 'shopfloor':
      return shopFloorIndex(t, p, (100 * pv) / unvalidatedSaturationVapourPressurePa(t));
  }
}

// Ciddor 1996: dispersion of standard air (15 °C, 101325 Pa, dry, 450 µmol/mol CO2), eq. (1), µm⁻².
const CIDDOR_K0 = 238.0185;
const CIDDOR_K1 = 5792105;
const CIDDOR_K2 = 57.362;
const CIDDOR_K3 = 167917;
// Water vapour at 20 °C, 1333 Pa, eq. (3), with Ciddor's correction factor 1.022.
const CIDDOR_W0 = 295.235;
const CIDDOR_W1 = 2.6422;
const CIDDOR_W2 = -0.03238;
const CIDDOR_W3 = 0.004028;
// Compressibility of moist air (BIPM 1981/91 formula as quoted by Ciddor, eq. (12)).
const Z_A0 = 1.58123e-6;
const Z_A1 = -2.9331e-8;
const Z_A2 = 1.1043e-10;
const Z_B0 = 5.707e-6;
const Z_B1 = -2.051e-8;
const Z_C0 = 1.9898e-4;
const Z_C1 = -2.376e-6;
const Z_D = 1.83e-11;
const Z_E = -0.765e-8;
// Enhancement factor of water vapour in air, f = α + βp + γt².
const ENHANCE_ALPHA = 1.00062;
const ENHANCE_BETA = 3.14e-8;
const ENHANCE_GAMMA = 5.6e-7;
/** Molar gas constant as used by Ciddor 1996, J/(mol·K). */
const GAS_CONSTANT = 8.31451;
/** Molar mass of water, kg/mol. */
const MOLAR_MASS_WATER = 0.018015;
/** Relative change of (n − 1) per µmol/mol of CO2 away from 450 (Ciddor 1996, eq. (2)). */
const CO2_SCALE_PER_PPM = 0.534e-6;

function compressibility(pressurePa: number, temperatureK: number, waterMoleFraction: number): number {
  const t = temperatureK - KELVIN_OFFSET;
  const pOverT = pressurePa / temperatureK;
  const xw = waterMoleFraction;
  return (
    1 -
    pOverT * (Z_A0 + Z_A1 * t + Z_A2 * t * t + (Z_B0 + Z_B1 * t) * xw + (Z_C0 + Z_C1 * t) * xw * xw) +
    pOverT * pOverT * (Z_D + Z_E * xw * xw)
  );
}

/** Densities of the reference gases do not depend on the inputs except through the CO2 molar mass. */
const Z_STANDARD_DRY_AIR = compressibility(101_325, 288.15, 0);
const Z_STANDARD_WATER_VAPOUR = compressibility(1333, 293.15, 1);
const DENSITY_STANDARD_WATER_VAPOUR = (1333 * MOLAR_MASS_WATER) / (Z_STANDARD_WATER_VAPOUR * GAS_CONSTANT * 293.15);

function ciddorIndex(t: number, p: number, pv: number, co2Ppm: number, wavelengthM: number): number {
  const sigma2 = squaredWavenumberPerUm2(wavelengthM);
  const dryStandard = 1e-8 * (CIDDOR_K1 / (CIDDOR_K0 - sigma2) + CIDDOR_K3 / (CIDDOR_K2 - sigma2));
  const dryWithCo2 = dryStandard * (1 + CO2_SCALE_PER_PPM * (co2Ppm - 450));
  const waterStandard =
    1e-8 * 1.022 * (CIDDOR_W0 + sigma2 * (CIDDOR_W1 + sigma2 * (CIDDOR_W2 + sigma2 * CIDDOR_W3)));
  const molarMassDryAir = 1e-3 * (28.9635 + 12.011e-6 * (co2Ppm - 400));
  const temperatureK = t + KELVIN_OFFSET;
  const waterMoleFraction = ((ENHANCE_ALPHA + ENHANCE_BETA * p + ENHANCE_GAMMA * t * t) * pv) / p;
  const z = compressibility(p, temperatureK, waterMoleFraction);
  const densityStandardDryAir = (101_325 * molarMassDryAir) / (Z_STANDARD_DRY_AIR * GAS_CONSTANT * 288.15);
  const densityDryAir = (p * molarMassDryAir * (1 - waterMoleFraction)) / (z * GAS_CONSTANT * temperatureK);
  const densityWater = (p * MOLAR_MASS_WATER * waterMoleFraction) / (z * GAS_CONSTANT * temperatureK);
  return (
    1 +
    (densityDryAir / densityStandardDryAir) * dryWithCo2 +
    (densityWater / DENSITY_STANDARD_WATER_VAPOUR) * waterStandard
  );
}

// Birch & Downs 1993 with the 1994 correction; water term as modified by Stone & Zimmerman (factor 292.75/T).
function edlenIndex(t: number, p: number, pv: number, co2Ppm: number, wavelengthM: number): number {
  const sigma2 = squaredWavenumberPerUm2(wavelengthM);
  const dryStandard = 1e-8 * (8342.54 + 2406147 / (130 - sigma2) + 15998 / (38.9 - sigma2));
  // Birch & Downs refer to 450 µmol/mol; other contents scale (n − 1) as in Ciddor's eq. (2).
  const dryWithCo2 = dryStandard * (1 + CO2_SCALE_PER_PPM * (co2Ppm - 450));
  const densityFactor = (1 + 1e-8 * (0.601 - 0.00972 * t) * p) / (1 + 0.003661 * t);
  const dry = (p * dryWithCo2 * densityFactor) / 96095.43;
  const water = 1e-10 * (292.75 / (t + KELVIN_OFFSET)) * (3.7345 - 0.0401 * sigma2) * pv;
  return 1 + dry - water;
}

// Stone & Zimmerman, Appendix B: p in kPa, t in °C, RH in %.
function shopFloorIndex(t: number, p: number, relativeHumidityPct: number): number {
  return 1 + (7.86e-4 * (p / 1000)) / (273 + t) - 1.5e-11 * relativeHumidityPct * (t * t + 160);
}

function squaredWavenumberPerUm2(wavelengthM: number): number {
  const sigma = 1e-6 / wavelengthM;
  return sigma * sigma;
}
