// Small helpers shared by the subcommands: option parsing with node:util parseArgs, numbers in the user's units
// checked against the physical range of each option, and the checks of input and output files made before any work.
import { createHash } from 'node:crypto';
import { constants, createReadStream, readFileSync } from 'node:fs';
import { access, realpath, stat } from 'node:fs/promises';
import { basename, dirname, join } from 'node:path';
import { parseArgs, type ParseArgsConfig } from 'node:util';

/** A subcommand of the `fringetally` tool. `run` resolves to the process exit code. */
export interface Command {
  readonly name: string;
  readonly summary: string;
  readonly help: string;
  run(argv: readonly string[]): Promise<number>;
}

/** Raised for a wrong command line; the tool prints the message and the command's help hint, exit code 2. */
export class UsageError extends Error {
  override readonly name = 'UsageError';
}

type OptionSpecs = NonNullable<ParseArgsConfig['options']>;

/** A number that a shell user writes as a value: -5, -.5, -1e-3, -Infinity (refused later as not finite). */
const NEGATIVE_NUMBER = /^-(?:\d|\.\d|Infinity$)/;

/**
 * parseArgs reads `--offset-y -500` as two options; a string option followed by a negative number takes it as its
 * value, as `--offset-y=-500` does.
 */
function joinNegativeValues(argv: readonly string[], options: OptionSpecs): string[] {
  const joined: string[] = [];
  for (let i = 0; i < argv.length; i++) {
    const token = argv[i]!;
    const next = argv[i + 1];
    const spec = token.startsWith('--') && !token.includes('=') ? options[token.slice(2)] : undefined;
    if (spec?.type === 'string' && next !== undefined && NEGATIVE_NUMBER.test(next)) {
      joined.push(`${token}=${next}`);
      i++;
    } else {
      joined.push(token);
    }
  }
  return joined;
}

/** Edit distance (Levenshtein), for "did you mean" hints. */
function distance(a: string, b: string): number {
  let previous = Array.from({ length: b.length + 1 }, (_, k) => k);
  for (let i = 1; i <= a.length; i++) {
    const current = [i];
    for (let j = 1; j <= b.length; j++) {
      current[j] = Math.min(previous[j]! + 1, current[j - 1]! + 1, previous[j - 1]! + (a[i - 1] === b[j - 1] ? 0 : 1));
    }
    previous = current;
  }
  return previous[b.length]!;
}

/** The known name closest to `name`, when it is close enough to be a likely typo (or one contains the other). */
export function closestName(name: string, known: readonly string[]): string | undefined {
  let best: string | undefined;
  let bestDistance = Infinity;
  for (const candidate of known) {
    const d = candidate.includes(name) || name.includes(candidate) ? 1 : distance(name, candidate);
    if (d < bestDistance) {
      best = candidate;
      bestDistance = d;
    }
  }
  return bestDistance <= Math.max(2, Math.floor(name.length / 3)) ? best : undefined;
}

export function parseCommandLine<T extends OptionSpecs>(
  argv: readonly string[],
  options: T,
  allowPositionals: boolean,
): ReturnType<typeof parseArgs<{ args: string[]; options: T; allowPositionals: boolean; strict: true }>> {
  try {
    return parseArgs({ args: joinNegativeValues(argv, options), options, allowPositionals, strict: true });
  } catch (error) {
    const message = (error as Error).message;
    // parseArgs's own wording names the option in quotes and suggests `--` tricks; say what to fix instead.
    const unknown = /^Unknown option '(-{1,2})([^']+)'/.exec(message);
    if (unknown !== null) {
      const near = closestName(unknown[2]!, Object.keys(options));
      throw new UsageError(`unknown option ${unknown[1]}${unknown[2]}${near === undefined ? '' : ` (did you mean --${near}?)`}`);
    }
    const missing = /^Option '(-[^ ']*)(?:, )?(--[^ ']+)? <value>' argument missing/.exec(message);
    if (missing !== null) throw new UsageError(`${missing[2] ?? missing[1]} needs a value`);
    const positional = /^Unexpected argument '([^']+)'/.exec(message);
    if (positional !== null) throw new UsageError(`unexpected argument "${positional[1]}": this command takes options only`);
    throw new UsageError(message);
  }
}

/**
 * The physical range of each numeric option, in the unit the option takes. The bounds are wide enough for any real
 * set-up and narrow enough to catch a value typed in another unit (metres into a nanometre option, kelvin into a
 * degree Celsius one, hPa into Pa, ppm/K into 1/K, degrees into radians).
 */
interface OptionRange {
  /** What the option is, in words, with the unit it takes. */
  readonly takes: string;
  readonly unit: string;
  readonly min: number;
  readonly max: number;
  /** The lower bound itself is refused (for quantities that must be positive). */
  readonly minOpen?: boolean;
}

const range = (takes: string, unit: string, min: number, max: number, minOpen = false): OptionRange => ({ takes, unit, min, max, minOpen });

export const OPTION_RANGES: Readonly<Record<string, OptionRange>> = {
  // The optical range: vacuum ultraviolet to thermal infrared.
  'wavelength-nm': range('the vacuum wavelength in nanometres (e.g. 632.9908)', 'nm', 150, 20_000),
  fold: range('the optical fold, a plain number (2 single pass, 4 double-pass plane mirror)', '', 0.5, 64),
  'refractive-index': range('the refractive index of the medium, a plain number (air about 1.00027)', '', 1, 2),
  'bandwidth-hz': range('the velocity loop bandwidth in hertz', 'Hz', 0, 1e9, true),
  'rate-hz': range('the sample rate in hertz', 'Hz', 0, 1e10, true),
  'duration-s': range('a duration in seconds', 's', 0, 1e6, true),
  duration: range('a duration in seconds', 's', 0, 1e7, true),
  'temperature-c': range('the air temperature in degrees Celsius (20 °C is 293.15 K)', '°C', -80, 150),
  'material-temperature-c': range('the material temperature in degrees Celsius (20 °C is 293.15 K)', '°C', -80, 150),
  'dew-point-c': range('the dew point in degrees Celsius', '°C', -80, 150),
  'pressure-pa': range('the air pressure in pascals (101325 Pa = 1013.25 hPa)', 'Pa', 10_000, 200_000),
  'humidity-pct': range('the relative humidity in percent', '%', 0, 100),
  'vapour-pressure-pa': range('the water-vapour partial pressure in pascals', 'Pa', 0, 100_000),
  'co2-ppm': range('the CO2 mole fraction in µmol/mol (ppm)', 'µmol/mol', 0, 10_000),
  'expansion-per-k': range('the expansion coefficient in 1/K (steel 11.5e-6)', '/K', -1e-4, 1e-4),
  'dead-path-m': range('the dead path in metres', 'm', 0, 100),
  'u-wavelength-rel': range('a relative standard uncertainty (He-Ne 1.5e-6)', '', 0, 1e-3),
  'u-index-equation': range('a standard uncertainty of the refractive index, a plain number', '', 0, 1e-4),
  'u-temperature-k': range('a standard uncertainty in kelvin', 'K', 0, 50),
  'u-material-temperature-k': range('a standard uncertainty in kelvin', 'K', 0, 50),
  'u-pressure-pa': range('a standard uncertainty in pascals', 'Pa', 0, 10_000),
  'u-humidity': range('a standard uncertainty in the humidity option’s unit', '', 0, 100),
  'u-expansion-per-k': range('a standard uncertainty in 1/K', '/K', 0, 1e-4),
  'u-dead-path-m': range('a standard uncertainty in metres', 'm', 0, 100),
  'velocity-m-s': range('a velocity in metres per second (0.01 m/s = 10 mm/s)', 'm/s', -100, 100),
  'drift-m-s': range('a velocity in metres per second', 'm/s', -100, 100),
  'distance-m': range('a distance in metres (20e-6 m = 20 µm)', 'm', 0, 100, true),
  'acceleration-m-s2': range('an acceleration in metres per second squared', 'm/s²', 0, 1e4, true),
  'dwell-s': range('a time in seconds', 's', 0, 1e4),
  'amplitude-m': range('a vibration amplitude in metres (2e-6 m = 2 µm)', 'm', 0, 1),
  'frequency-hz': range('a frequency in hertz', 'Hz', 0, 1e8, true),
  'offset-x': range('an offset in ADC counts', 'counts', -(2 ** 31), 2 ** 31),
  'offset-y': range('an offset in ADC counts', 'counts', -(2 ** 31), 2 ** 31),
  'amplitude-x': range('an amplitude in ADC counts', 'counts', 0, 2 ** 31, true),
  'amplitude-y': range('an amplitude in ADC counts', 'counts', 0, 2 ** 31, true),
  // Beyond ±π/2 the quadrature is lost; a value of several units is degrees typed into a radian option.
  'phase-error-rad': range('the quadrature error in radians (0.06 rad = 3.4°)', 'rad', -1.5, 1.5),
  noise: range('the noise in ADC counts RMS', 'counts', 0, 2 ** 31),
  'min-coverage': range('a fraction of a fringe', '', 0, 1, true),
};

/** Numbers in messages: as the user would write them, without binary-float tails (0.0000015500000000000002). */
export function formatNumber(value: number, digits = 6): string {
  if (value === 0 || !Number.isFinite(value)) return String(value);
  return String(Number(value.toPrecision(digits)));
}

/**
 * Reads a numeric option; `undefined` stays undefined so the caller's default applies. Options with a physical
 * range (OPTION_RANGES) are checked against it; the message names the option as `label` (default `--name`), the
 * unit it takes and the text as typed.
 */
export function numberOption(name: string, text: string | undefined, label = `--${name}`): number | undefined {
  if (text === undefined) return undefined;
  const value = Number(text);
  const limits = OPTION_RANGES[name];
  if (text.trim() === '' || !Number.isFinite(value)) {
    throw new UsageError(`${label} must be a finite number${limits === undefined ? '' : `: ${limits.takes}`} (got "${text}")`);
  }
  if (limits !== undefined && (value > limits.max || value < limits.min || (limits.minOpen === true && value === limits.min))) {
    const unit = limits.unit === '' ? '' : ` ${limits.unit}`;
    const bounds = limits.minOpen === true ? `above ${formatNumber(limits.min)}${unit} and at most ${formatNumber(limits.max)}${unit}` : `${formatNumber(limits.min)} to ${formatNumber(limits.max)}${unit}`;
    throw new UsageError(`${label} takes ${limits.takes}: ${bounds} (got ${text})`);
  }
  return value;
}

/** Core option names (from OptionError.option) as the user typed them, with the factor from the user's unit. */
export interface FlagOf {
  readonly flag: string;
  /** Core value = user value × toCore (1e-9 for nm → m). */
  readonly toCore: number;
  readonly unit: string;
}

/**
 * Re-words an error the core raised about one of its options (`vacuumWavelengthM must be a number in [2e-7, 1e-5]
 * (got 6.3e-16)`) in the user's terms: the flag, numbers in the flag's unit at sensible digits. Errors about
 * options without a flag keep the core's words; other errors pass unchanged.
 */
export function inUserTerms(error: unknown, flags: Readonly<Record<string, FlagOf>>): Error {
  const failure = error as Error & { option?: unknown; rule?: unknown; value?: unknown };
  if (typeof failure.option !== 'string' || typeof failure.rule !== 'string') return failure as Error;
  const flag = flags[failure.option];
  // Still the user's input, under the core's name: a usage error all the same.
  if (flag === undefined) return new UsageError(failure.message);
  const unit = flag.unit === '' ? '' : ` ${flag.unit}`;
  // A range the core states in its own unit ("in [6.325e-7, 6.335e-7] m") is restated in the flag's; long
  // decimals are cut to sensible digits.
  const rule = failure.rule
    .replace(/\[([^\],]+), ([^\]]+)\] m\b/g, (_, low: string, high: string) => `[${formatNumber(Number(low) / flag.toCore)}, ${formatNumber(Number(high) / flag.toCore)}]${unit}`)
    .replace(/, in metres\)/g, ')')
    .replace(/-?\d+\.\d{7,}/g, (number) => formatNumber(Number(number)))
    .replace(/\](?=$|[,:;]| \()/g, `]${unit}`);
  const got = typeof failure.value === 'number' ? ` (got ${formatNumber(failure.value / flag.toCore)}${unit})` : '';
  return new UsageError(`${flag.flag} must be ${rule}${got}`);
}

export interface FileUse {
  /** How the user named it: `--out`, `--calibration`, `the capture`. */
  readonly option: string;
  readonly path: string;
}

/** A file's identity: device and inode when it exists, else the resolved path it would be created at. */
async function identityOf(path: string): Promise<{ key: string; exists: boolean; directory: boolean }> {
  try {
    const info = await stat(path);
    return { key: `${info.dev}:${info.ino}`, exists: true, directory: info.isDirectory() };
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code !== 'ENOENT') throw error;
    let parent: string;
    try {
      parent = await realpath(dirname(path));
    } catch {
      throw new Error(`${path}: the folder ${dirname(path)} does not exist`);
    }
    return { key: join(parent, basename(path)), exists: false, directory: false };
  }
}

/**
 * Checks, before any work, that every input can be read and that no output is a folder, an input or another
 * output (compared by device and inode, so `cap.csv`, `./cap.csv`, a symbolic or a hard link all count).
 * A missing or unreadable input throws a plain Error (exit 1); an output that clashes is a UsageError (exit 2).
 * Outputs named `-` (standard output) are skipped.
 */
export async function checkFiles(inputs: readonly FileUse[], outputs: readonly FileUse[]): Promise<void> {
  const seen: Array<FileUse & { key: string }> = [];
  for (const input of inputs) {
    let info;
    try {
      info = await stat(input.path);
    } catch (error) {
      const code = (error as NodeJS.ErrnoException).code;
      throw new Error(`${input.path}: ${code === 'ENOENT' ? `no such file (${input.option})` : `cannot read ${input.option} (${code})`}`);
    }
    if (info.isDirectory()) throw new Error(`${input.path}: is a folder, not a file (${input.option})`);
    try {
      await access(input.path, constants.R_OK);
    } catch (error) {
      throw new Error(`${input.path}: cannot read ${input.option} (${(error as NodeJS.ErrnoException).code})`);
    }
    seen.push({ ...input, key: `${info.dev}:${info.ino}` });
  }
  for (const output of outputs) {
    if (output.path === '-') continue;
    const identity = await identityOf(output.path);
    if (identity.directory) throw new UsageError(`${output.option} ${output.path}: is a folder; give a file name`);
    const clash = seen.find((other) => other.key === identity.key);
    if (clash !== undefined) {
      throw new UsageError(`${output.option} ${output.path} is the same file as ${clash.option} ${clash.path}: refusing to overwrite it`);
    }
    seen.push({ ...output, key: identity.key });
  }
}

/**
 * Where text goes (docs/cli.md): the result a command was asked for goes to its --out file, or to standard output
 * when it has none; notes, warnings, progress and the summary of the run go to standard error.
 */
export function say(lines: string | readonly string[]): void {
  process.stderr.write((typeof lines === 'string' ? lines : lines.join('\n')) + '\n');
}

export const LASER_CAUTION =
  'Caution: interferometer lasers (typically IEC 60825-1 Class 2 He-Ne) must not be stared into or viewed through optics;\n' +
  'moving stages can crush and cut. fringetally is a measuring tool, never a safety interlock or emergency stop.\n' +
  "Follow local laser-safety rules, the laser's own label and your site's safety officer.";

/** SHA-256 of a file, hex, read as a stream (constant memory for any capture). */
export async function fileHash(path: string): Promise<string> {
  const hash = createHash('sha256');
  for await (const chunk of createReadStream(path)) hash.update(chunk as Buffer);
  return hash.digest('hex');
}

/** The version in package.json. */
export function toolVersion(): string {
  const pkg = JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string };
  return pkg.version;
}
