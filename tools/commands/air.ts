// `fringetally air`: refractive index of air and wavelength in air from the environment (Ciddor 1996, modified
// Edlén, or the NIST shop-floor formula), with the equation's validity warnings.
import {
  airIndexEquationNames,
  airIndexEquations,
  DEFAULT_AIR_INDEX_EQUATION,
  DEFAULT_CO2_PPM,
  refractiveIndexOfAir,
  type AirIndexEquation,
  type AirIndexOptions,
} from '../../src/core/metrology/index.js';
import { inUserTerms, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { AIR_FLAGS } from '../environment-options.js';

const help = `Usage: fringetally air --temperature-c T --pressure-pa P (--humidity-pct RH | --dew-point-c TD | --vapour-pressure-pa PV)
                       --wavelength-nm L [--co2-ppm C] [--equation ciddor|edlen|shopfloor] [--strict] [--json]

Prints the refractive index n of air and the wavelength in air, lambda_air = lambda_vac / n.

Options:
  --temperature-c T          air temperature, °C (ITS-90)
  --pressure-pa P            total air pressure, Pa (101325 Pa = 1013.25 hPa)
  --humidity-pct RH          relative humidity, % (0 to 100)
  --dew-point-c TD           dew point (frost point below 0 °C), °C; instead of --humidity-pct
  --vapour-pressure-pa PV    partial pressure of water vapour, Pa; instead of --humidity-pct
  --co2-ppm C                CO2 mole fraction, µmol/mol (default ${DEFAULT_CO2_PPM})
  --wavelength-nm L          vacuum wavelength, nm (e.g. 632.9908 for an unstabilised He-Ne)
  --equation NAME            ciddor (Ciddor 1996, default), edlen (Birch & Downs modified Edlén,
                             NIST water-vapour term) or shopfloor (NIST shop-floor formula, 633 nm only)
  --strict                   treat inputs outside the equation's stated validity range as errors
                             (default: print a warning on stderr and still give the value)
  --json                     print one JSON object: n, wavelengthAirNm, wavelengthVacuumNm, equation,
                             temperatureC, pressurePa, relativeHumidityPct, vapourPressurePa, co2Ppm, warnings

Saturation vapour pressure: IAPWS-IF97 over water, IAPWS sublimation equation over ice below 0 °C.
Exit codes: 0 done (warnings may have been printed), 2 wrong or out-of-range input.`;

function required(name: string, text: string | undefined): number {
  const value = numberOption(name, text);
  if (value === undefined) throw new UsageError(`--${name} is required`);
  return value;
}

async function run(argv: readonly string[]): Promise<number> {
  const { values } = parseCommandLine(
    argv,
    {
      'temperature-c': { type: 'string' },
      'pressure-pa': { type: 'string' },
      'humidity-pct': { type: 'string' },
      'dew-point-c': { type: 'string' },
      'vapour-pressure-pa': { type: 'string' },
      'co2-ppm': { type: 'string' },
      'wavelength-nm': { type: 'string' },
      equation: { type: 'string' },
      strict: { type: 'boolean' },
      json: { type: 'boolean' },
    },
    false,
  );
  const humidityFlags = (['humidity-pct', 'dew-point-c', 'vapour-pressure-pa'] as const).filter(
    (flag) => values[flag] !== undefined,
  );
  if (humidityFlags.length !== 1) {
    throw new UsageError(
      humidityFlags.length === 0
        ? 'give the humidity as one of --humidity-pct, --dew-point-c or --vapour-pressure-pa'
        : `give the humidity only once (got ${humidityFlags.map((flag) => `--${flag}`).join(' and ')})`,
    );
  }
  const equationText = values.equation ?? DEFAULT_AIR_INDEX_EQUATION;
  if (!(airIndexEquations as readonly string[]).includes(equationText)) {
    throw new UsageError(`--equation must be one of ${airIndexEquations.join(', ')} (got "${equationText}")`);
  }
  const equation = equationText as AirIndexEquation;
  const wavelengthNm = required('wavelength-nm', values['wavelength-nm']);
  const co2Ppm = numberOption('co2-ppm', values['co2-ppm']);
  const relativeHumidityPct = numberOption('humidity-pct', values['humidity-pct']);
  const dewPointC = numberOption('dew-point-c', values['dew-point-c']);
  const vapourPressurePa = numberOption('vapour-pressure-pa', values['vapour-pressure-pa']);
  const options: AirIndexOptions = {
    equation,
    outOfRange: values.strict === true ? 'error' : 'warn',
    temperatureC: required('temperature-c', values['temperature-c']),
    pressurePa: required('pressure-pa', values['pressure-pa']),
    vacuumWavelengthM: wavelengthNm * 1e-9,
    ...(co2Ppm === undefined ? {} : { co2Ppm }),
    ...(relativeHumidityPct === undefined ? {} : { relativeHumidityPct }),
    ...(dewPointC === undefined ? {} : { dewPointC }),
    ...(vapourPressurePa === undefined ? {} : { vapourPressurePa }),
  };

  let result;
  try {
    result = refractiveIndexOfAir(options);
  } catch (error) {
    throw inUserTerms(error, AIR_FLAGS);
  }

  for (const warning of result.warnings) process.stderr.write(`warning: ${warning.message}\n`);
  const wavelengthAirNm = result.airWavelengthM * 1e9;
  if (values.json === true) {
    const report = {
      equation: result.equation,
      n: result.n,
      wavelengthAirNm,
      wavelengthVacuumNm: wavelengthNm,
      temperatureC: options.temperatureC,
      pressurePa: options.pressurePa,
      relativeHumidityPct: result.relativeHumidityPct,
      vapourPressurePa: result.vapourPressurePa,
      co2Ppm: result.co2Ppm,
      warnings: result.warnings.map((warning) => warning.message),
    };
    process.stdout.write(JSON.stringify(report) + '\n');
    return 0;
  }
  const lines = [
    `equation             ${airIndexEquationNames[result.equation]}`,
    `refractive index n   ${result.n.toFixed(12)}`,
    `(n - 1)              ${((result.n - 1) * 1e6).toFixed(6)} ppm`,
    `wavelength in air    ${wavelengthAirNm.toFixed(7)} nm`,
    `vacuum wavelength    ${wavelengthNm} nm`,
    `air                  ${options.temperatureC} °C, ${options.pressurePa} Pa, ` +
      `${result.relativeHumidityPct.toFixed(2)} % RH (water vapour ${result.vapourPressurePa.toFixed(2)} Pa), ` +
      `CO2 ${result.co2Ppm} µmol/mol`,
  ];
  process.stdout.write(lines.join('\n') + '\n');
  if (result.warnings.length > 0) {
    process.stdout.write(`${result.warnings.length} validity warning(s), see stderr\n`);
  }
  return 0;
}

export const air: Command = {
  name: 'air',
  summary: 'refractive index of air and wavelength in air (Ciddor, modified Edlén, shop-floor)',
  help,
  run,
};
