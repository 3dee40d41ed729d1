// Validation of stage options: done once at construction, with errors that name the option, the rule and the value.

/** The largest count of samples or fringes kept exactly in a double: 2^53 − 1. */
export const MAX_COUNT = 2 ** 53 - 1;

/** A stage option broke its rule. `option`, `rule` and `value` let callers report it precisely. */
export class OptionError extends RangeError {
  override readonly name = 'OptionError';
  constructor(
    readonly option: string,
    readonly rule: string,
    readonly value: unknown,
  ) {
    super(`${option} must be ${rule} (got ${describe(value)})`);
  }
}

function describe(value: unknown): string {
  // Numbers as written (NaN, Infinity); strings quoted; records as JSON.
  return typeof value === 'number' ? String(value) : (JSON.stringify(value) ?? String(value));
}

// Number.isFinite and Number.isInteger are false for anything but a number; these let TypeScript know it.
const isFiniteNumber = (value: unknown): value is number => Number.isFinite(value);
const isInteger = (value: unknown): value is number => Number.isInteger(value);

export function positiveFinite(option: string, value: unknown): number {
  if (!isFiniteNumber(value) || value <= 0) {
    throw new OptionError(option, 'a positive finite number', value);
  }
  return value;
}

export function finiteNumber(option: string, value: unknown): number {
  if (!isFiniteNumber(value)) throw new OptionError(option, 'a finite number', value);
  return value;
}

export function numberInRange(option: string, value: unknown, min: number, max: number, openMin = false): number {
  if (!isFiniteNumber(value) || value > max || (openMin ? value <= min : value < min)) {
    throw new OptionError(option, `a number in ${openMin ? '(' : '['}${min}, ${max}]`, value);
  }
  return value;
}

export function integerInRange(option: string, value: unknown, min: number, max: number): number {
  if (!isInteger(value) || value < min || value > max) {
    throw new OptionError(option, `an integer in ${min}..${max}`, value);
  }
  return value;
}

export function oneOf<T extends string>(option: string, value: unknown, choices: readonly T[]): T {
  if (typeof value !== 'string' || !(choices as readonly string[]).includes(value)) {
    throw new OptionError(option, `one of ${choices.map((choice) => JSON.stringify(choice)).join(', ')}`, value);
  }
  return value as T;
}
