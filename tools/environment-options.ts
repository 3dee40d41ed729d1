// Environment, material and uncertainty options of replay (and listen): the refractive index of air from the
// air conditions, normalisation of the reading to 20 °C, and the GUM budget of a reading. Values come from the
// command line, or from a JSON config file (--config) whose keys are the option names without the dashes.
import { readFileSync } from 'node:fs';
import {
  airIndexAt,
  airIndexSensitivities,
  DEFAULT_AIR_INDEX_EQUATION,
  DEFAULT_CO2_PPM,
  materials,
  readingUncertaintyBudget,
  refractiveIndexOfAir,
  REFERENCE_TEMPERATURE_C,
  type AirIndexEquation,
  type AirIndexOptions,
  type EnvironmentSchedule,
  type UncertaintyBudget,
} from '../src/core/index.js';
import { closestName, inUserTerms, numberOption, OPTION_RANGES, UsageError, type FlagOf } from './cli-kit.js';

export const environmentOptionSpecs = {
  config: { type: 'string' },
  'temperature-c': { type: 'string' },
  'pressure-pa': { type: 'string' },
  'humidity-pct': { type: 'string' },
  'dew-point-c': { type: 'string' },
  'vapour-pressure-pa': { type: 'string' },
  'co2-ppm': { type: 'string' },
  equation: { type: 'string' },
  material: { type: 'string' },
  'expansion-per-k': { type: 'string' },
  'material-temperature-c': { type: 'string' },
  'dead-path-m': { type: 'string' },
  'u-wavelength-rel': { type: 'string' },
  'u-index-equation': { type: 'string' },
  'u-temperature-k': { type: 'string' },
  'u-pressure-pa': { type: 'string' },
  'u-humidity': { type: 'string' },
  'u-material-temperature-k': { type: 'string' },
  'u-expansion-per-k': { type: 'string' },
  'u-dead-path-m': { type: 'string' },
} as const;

export const environmentOptionHelp = `Environment (refractive index of air; without it the vacuum wavelength is used, n = 1):
  --temperature-c T          air temperature, °C
  --pressure-pa P            air pressure, Pa
  --humidity-pct RH          relative humidity, %   (or --dew-point-c TD, °C, or --vapour-pressure-pa PV, Pa)
  --co2-ppm C                CO2 mole fraction, µmol/mol (default ${DEFAULT_CO2_PPM})
  --equation NAME            ciddor, edlen or shopfloor (default ${DEFAULT_AIR_INDEX_EQUATION})
Material and geometry:
  --material KEY             normalise the reading to 20 °C for this material (aluminium, steel, silicon,
                             granite, fe-ni36, fused-silica, glass-ceramic), or --expansion-per-k A (1/K)
  --material-temperature-c T material temperature, °C (required with a material)
  --dead-path-m D            unmeasured path at the datum, m (enters the uncertainty budget)
Uncertainty (standard uncertainties; defaults in brackets):
  --u-wavelength-rel U       relative, of the vacuum wavelength [1.5e-6: unstabilised He-Ne, CIPM 2007]
  --u-index-equation U       of the index equation [1e-8, recalled]
  --u-temperature-k U, --u-pressure-pa U, --u-humidity U (in the humidity's unit)   [0.1 K, 10 Pa, 2 % / 0.5 K / 30 Pa]
  --u-material-temperature-k U, --u-expansion-per-k U                               [0.1 K, 1e-6 /K or the table's spread]
  --u-dead-path-m U                                                                 [1e-3 m]
  --config FILE              JSON object with any of these options by name without the dashes
                             (e.g. {"temperature-c": 20.3, "pressure-pa": 101200, "humidity-pct": 45})`;

type Values = Record<string, string | boolean | undefined>;

/** The core's air-index option names as the user types them (errors from refractiveIndexOfAir name these). */
export const AIR_FLAGS: Readonly<Record<string, FlagOf>> = {
  temperatureC: { flag: '--temperature-c', toCore: 1, unit: '°C' },
  pressurePa: { flag: '--pressure-pa', toCore: 1, unit: 'Pa' },
  relativeHumidityPct: { flag: '--humidity-pct', toCore: 1, unit: '%' },
  dewPointC: { flag: '--dew-point-c', toCore: 1, unit: '°C' },
  vapourPressurePa: { flag: '--vapour-pressure-pa', toCore: 1, unit: 'Pa' },
  co2Ppm: { flag: '--co2-ppm', toCore: 1, unit: 'µmol/mol' },
  vacuumWavelengthM: { flag: '--wavelength-nm', toCore: 1e-9, unit: 'nm' },
  equation: { flag: '--equation', toCore: 1, unit: '' },
  material: { flag: '--material', toCore: 1, unit: '' },
  materialTemperatureC: { flag: '--material-temperature-c', toCore: 1, unit: '°C' },
};

/**
 * Merges a --config file under the command-line values (the command line wins). Every key must be one of the
 * command's options that take a value (`known`); numbers are range-checked here, so an error names the file and key.
 */
export function withConfig(values: Values, known: Readonly<Record<string, { type: string }>>): Values {
  const path = values.config;
  if (typeof path !== 'string') return values;
  let parsed: unknown;
  try {
    parsed = JSON.parse(readFileSync(path, 'utf8'));
  } catch (error) {
    const failure = error as NodeJS.ErrnoException;
    throw new UsageError(`--config ${path}: not a readable JSON file (${failure.code ?? failure.message})`);
  }
  if (parsed === null || typeof parsed !== 'object' || Array.isArray(parsed)) throw new UsageError(`--config ${path}: expected a JSON object`);
  const keys = Object.keys(known).filter((key) => key !== 'config' && known[key]!.type === 'string');
  const merged: Values = {};
  for (const [key, value] of Object.entries(parsed as Record<string, unknown>)) {
    if (!keys.includes(key)) {
      const near = closestName(key.replace(/^-+/, ''), keys);
      throw new UsageError(`--config ${path}: unknown key "${key}"${near === undefined ? '' : ` (did you mean "${near}"?)`}`);
    }
    if (typeof value !== 'number' && typeof value !== 'string') {
      throw new UsageError(`--config ${path}: "${key}" must be a number or a string (got ${JSON.stringify(value)})`);
    }
    if (OPTION_RANGES[key] !== undefined) numberOption(key, String(value), `"${key}" in --config ${path}`);
    merged[key] = String(value);
  }
  return { ...merged, ...Object.fromEntries(Object.entries(values).filter(([, value]) => value !== undefined)) };
}

export interface Environment {
  /** Air conditions, or null when none were given (n = 1). */
  readonly air: AirIndexOptions | null;
  readonly refractiveIndex: number;
  /** Factor that normalises a reading to 20 °C: 1 / (1 + α (T − 20)); 1 without a material. */
  readonly thermalFactor: number;
  readonly material: { readonly expansionPerK: number; readonly temperatureC: number; readonly uExpansionPerK: number } | null;
  readonly deadPathM: number | null;
  readonly notes: readonly string[];
  readonly uncertaintyInputs: Values;
}

const text = (values: Values, name: string) => values[name] as string | undefined;

export function environmentOf(values: Values, vacuumWavelengthM: number, explicitIndex: number | undefined): Environment {
  const notes: string[] = [];
  const temperatureC = numberOption('temperature-c', text(values, 'temperature-c'));
  const pressurePa = numberOption('pressure-pa', text(values, 'pressure-pa'));
  const humidity = (['humidity-pct', 'dew-point-c', 'vapour-pressure-pa'] as const).filter((name) => values[name] !== undefined);
  let air: AirIndexOptions | null = null;
  let refractiveIndex = explicitIndex ?? 1;
  if (temperatureC !== undefined || pressurePa !== undefined || humidity.length > 0) {
    if (explicitIndex !== undefined) throw new UsageError('give either --refractive-index or the air conditions, not both');
    if (temperatureC === undefined || pressurePa === undefined) throw new UsageError('the air conditions need both --temperature-c and --pressure-pa');
    if (humidity.length !== 1) throw new UsageError('give the humidity once: --humidity-pct, --dew-point-c or --vapour-pressure-pa');
    const equation = equationOf(values);
    const co2Ppm = numberOption('co2-ppm', text(values, 'co2-ppm'));
    const humidityValue = numberOption(humidity[0]!, text(values, humidity[0]!))!;
    air = {
      temperatureC,
      pressurePa,
      vacuumWavelengthM,
      equation,
      ...(co2Ppm === undefined ? {} : { co2Ppm }),
      ...(humidity[0] === 'humidity-pct' ? { relativeHumidityPct: humidityValue } : {}),
      ...(humidity[0] === 'dew-point-c' ? { dewPointC: humidityValue } : {}),
      ...(humidity[0] === 'vapour-pressure-pa' ? { vapourPressurePa: humidityValue } : {}),
    };
    let result;
    try {
      result = refractiveIndexOfAir(air);
    } catch (error) {
      throw inUserTerms(error, AIR_FLAGS);
    }
    refractiveIndex = result.n;
    for (const warning of result.warnings) notes.push(`warning: ${warning.message}`);
    notes.push(`refractive index of air ${result.n.toFixed(10)} (${equation}), wavelength in air ${(result.airWavelengthM * 1e9).toFixed(6)} nm`);
  }

  let material: Environment['material'] = null;
  const materialKey = text(values, 'material');
  const expansion = numberOption('expansion-per-k', text(values, 'expansion-per-k'));
  if (materialKey !== undefined || expansion !== undefined) {
    if (materialKey !== undefined && expansion !== undefined) throw new UsageError('give either --material or --expansion-per-k, not both');
    const materialTemperatureC = numberOption('material-temperature-c', text(values, 'material-temperature-c'));
    if (materialTemperatureC === undefined) throw new UsageError('a material needs --material-temperature-c');
    let expansionPerK = expansion ?? 0;
    let uExpansionPerK = 1e-6;
    if (materialKey !== undefined) {
      const entry = materials.find((material) => material.key === materialKey);
      if (entry === undefined) {
        const near = closestName(materialKey, materials.map((material) => material.key));
        throw new UsageError(
          `--material must be one of ${materials.map((material) => material.key).join(', ')} (got "${materialKey}")${near === undefined ? '' : `; did you mean ${near}?`}`,
        );
      }
      expansionPerK = entry.expansionPerK;
      // A spread stated as a half-range is read as a rectangular distribution (GUM 4.3.7).
      if (entry.halfRangePerK > 0) uExpansionPerK = entry.halfRangePerK / Math.sqrt(3);
      notes.push(`material ${entry.name}: α = ${entry.expansionPerK} /K (${entry.source}, ${entry.tag})`);
    }
    material = { expansionPerK, temperatureC: materialTemperatureC, uExpansionPerK };
    notes.push(`reading normalised to ${REFERENCE_TEMPERATURE_C} °C from a material temperature of ${materialTemperatureC} °C`);
  }
  const thermalFactor = material === null ? 1 : 1 / (1 + material.expansionPerK * (material.temperatureC - REFERENCE_TEMPERATURE_C));
  const deadPathM = numberOption('dead-path-m', text(values, 'dead-path-m')) ?? null;
  if (air === null && explicitIndex === undefined) notes.push('no refractive index or environment given: the vacuum wavelength is used (n = 1)');
  return { air, refractiveIndex, thermalFactor, material, deadPathM, notes, uncertaintyInputs: values };
}

/** The GUM budget of a reading of `lengthM` (already compensated and normalised), or null without air conditions. */
export function budgetOf(environment: Environment, lengthM: number, periodicResidualAmplitudeM: number): UncertaintyBudget | null {
  if (environment.air === null) return null;
  const values = environment.uncertaintyInputs;
  const u = (name: string, fallback: number) => numberOption(name, text(values, name)) ?? fallback;
  const humidityDefault = environment.air.dewPointC !== undefined ? 0.5 : environment.air.vapourPressurePa !== undefined ? 30 : 2;
  const material = environment.material;
  const slopes = airIndexSensitivities(environment.air);
  // The budget's model normalises the reading itself: give it the reading before normalisation.
  return readingUncertaintyBudget({
    lengthM: lengthM / environment.thermalFactor,
    air: environment.air,
    wavelengthRelativeUncertainty: u('u-wavelength-rel', 1.5e-6),
    indexEquationUncertainty: u('u-index-equation', 1e-8),
    airTemperatureUncertaintyK: u('u-temperature-k', 0.1),
    pressureUncertaintyPa: u('u-pressure-pa', 10),
    humidityUncertainty: u('u-humidity', humidityDefault),
    periodicResidualAmplitudeM,
    ...(material === null
      ? {}
      : {
          material: {
            expansionPerK: material.expansionPerK,
            temperatureC: material.temperatureC,
            expansionUncertaintyPerK: u('u-expansion-per-k', material.uExpansionPerK),
            temperatureUncertaintyK: u('u-material-temperature-k', 0.1),
          },
        }),
    ...(environment.deadPathM === null
      ? {}
      : {
          deadPath: {
            deadPathM: environment.deadPathM,
            indexChangeSinceDatum: 0,
            deadPathUncertaintyM: u('u-dead-path-m', 1e-3),
            // The index may have moved since the datum within what the sensors can tell: one sensor uncertainty.
            indexChangeUncertainty: Math.hypot(slopes.perKelvin * u('u-temperature-k', 0.1), slopes.perPascal * u('u-pressure-pa', 10)),
          },
        }),
  });
}

/**
 * The index of air per block from an environment log (replay: the whole file; listen: the file as it grows, so
 * `schedule` gives the latest), each validity warning written once through `warn`.
 */
export function environmentLogIndex(
  file: string,
  schedule: () => EnvironmentSchedule,
  vacuumWavelengthM: number,
  equation: AirIndexEquation,
  warn: (line: string) => void,
): (tS: number) => number {
  const warned = new Set<string>();
  return (tS) => {
    const result = airIndexAt(schedule(), tS, { vacuumWavelengthM, equation });
    for (const warning of result.warnings) {
      if (warned.has(warning.message)) continue;
      warned.add(warning.message);
      warn(`${file} at t = ${tS.toFixed(3)} s: warning: ${warning.message}`);
    }
    return result.n;
  };
}

/** --equation, checked. */
export function equationOf(values: Record<string, unknown>): AirIndexEquation {
  const equation = (values.equation ?? DEFAULT_AIR_INDEX_EQUATION) as AirIndexEquation;
  if (!['ciddor', 'edlen', 'shopfloor'].includes(equation)) throw new UsageError(`--equation must be ciddor, edlen or shopfloor (got "${equation}")`);
  return equation;
}
