// Small helpers shared by the subcommands: option parsing with node:util parseArgs and uniform usage errors.
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

export function parseCommandLine<T extends NonNullable<ParseArgsConfig['options']>>(
  argv: readonly string[],
  options: T,
  allowPositionals: boolean,
): ReturnType<typeof parseArgs<{ args: string[]; options: T; allowPositionals: boolean; strict: true }>> {
  // parseArgs reads `--offset-mm -2` as an ambiguous option; a value that reads as a negative number (or a list or
  // range starting with one) is joined to its string option as `--offset-mm=-2`.
  const args: string[] = [];
  for (let i = 0; i < argv.length; i++) {
    const name = argv[i]!.startsWith('--') ? argv[i]!.slice(2) : null;
    const next = argv[i + 1];
    if (name !== null && options[name]?.type === 'string' && next !== undefined && /^-[0-9.]/.test(next)) {
      args.push(`--${name}=${next}`);
      i++;
    } else args.push(argv[i]!);
  }
  try {
    return parseArgs({ args, options, allowPositionals, strict: true });
  } catch (error) {
    throw new UsageError((error as Error).message);
  }
}

/** Reads a numeric option; `undefined` stays undefined so the caller's default applies. */
export function numberOption(name: string, text: string | undefined): number | undefined {
  if (text === undefined) return undefined;
  const value = Number(text);
  if (text.trim() === '' || !Number.isFinite(value)) {
    throw new UsageError(`--${name} must be a finite number (got "${text}")`);
  }
  return value;
}

export const LASER_CAUTION =
  'Caution: interferometer lasers (typically IEC 60825-1 Class 2 He-Ne) must not be stared into or viewed through optics;\n' +
  'moving stages can crush and cut. fringetally is a measuring tool, never a safety interlock or emergency stop.\n' +
  "Follow local laser-safety rules, the laser's own label and your site's safety officer.";
