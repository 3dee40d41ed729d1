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
  try {
    return parseArgs({ args: [...argv], options, allowPositionals, strict: true });
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
