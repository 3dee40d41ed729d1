// Validation of option values, once at construction, with messages that name the option, the rule and the value.

export function checkInteger(name: string, value: number, min: number, max: number): number {
  if (!Number.isInteger(value) || value < min || value > max) {
    throw new RangeError(`${name} must be an integer in ${min}..${max} (got ${String(value)})`);
  }
  return value;
}

export function checkPositiveFinite(name: string, value: number): number {
  if (typeof value !== 'number' || !Number.isFinite(value) || value <= 0) {
    throw new RangeError(`${name} must be a positive finite number (got ${String(value)})`);
  }
  return value;
}

/** Reads a command-line channel argument: all digits means a 1-based position, anything else a name. */
export function parseChannelSelector(text: string): string | number {
  return /^[0-9]+$/.test(text) ? Number(text) : text;
}
