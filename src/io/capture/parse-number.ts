// Decimal number parsing straight from file bytes, without building a string per field.
// Fast path after W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990: a mantissa of at most
// 2^53 and a power of ten of at most 22 are both exact doubles, so one multiplication or division rounds correctly.

/** Result slots, reused across calls so that parsing allocates nothing. */
export interface ParsedNumber {
  value: number;
  /** False when the bytes are not a number; `value` is then meaningless. */
  ok: boolean;
  /** True for a plain integer (no point, no exponent, not NaN/Infinity). */
  integer: boolean;
}

export function createParsedNumber(): ParsedNumber {
  return { value: 0, ok: false, integer: false };
}

const EXACT_POWERS_OF_TEN = Array.from({ length: 23 }, (_, k) => 10 ** k);
/** Mantissas below this are exact in a double (2^53). */
const EXACT_MANTISSA_LIMIT = 9_007_199_254_740_992;

const SPACE = 0x20;
const TAB = 0x09;
const PLUS = 0x2b;
const MINUS = 0x2d;
const POINT = 0x2e;
const ZERO = 0x30;
const NINE = 0x39;

/**
 * Parses `[+-]digits[.digits][(e|E)[+-]digits]` or `[+-]nan|inf|infinity` (any case) from bytes[start, end),
 * ignoring spaces and tabs around it. Writes into `out`.
 */
export function parseNumberBytes(bytes: Buffer, start: number, end: number, out: ParsedNumber): void {
  while (start < end && (bytes[start] === SPACE || bytes[start] === TAB)) start++;
  while (end > start && (bytes[end - 1] === SPACE || bytes[end - 1] === TAB)) end--;
  out.ok = false;
  out.integer = false;
  let i = start;
  let negative = false;
  if (i < end && (bytes[i] === PLUS || bytes[i] === MINUS)) {
    negative = bytes[i] === MINUS;
    i++;
  }
  let mantissa = 0;
  /** Digits after leading zeros; beyond 16 the mantissa may have lost exactness. */
  let significantDigits = 0;
  let digits = 0;
  let exponent = 0;
  while (i < end && bytes[i]! >= ZERO && bytes[i]! <= NINE) {
    if (mantissa !== 0 || bytes[i] !== ZERO) significantDigits++;
    mantissa = mantissa * 10 + (bytes[i]! - ZERO);
    digits++;
    i++;
  }
  let integer = true;
  if (i < end && bytes[i] === POINT) {
    integer = false;
    i++;
    while (i < end && bytes[i]! >= ZERO && bytes[i]! <= NINE) {
      if (mantissa !== 0 || bytes[i] !== ZERO) significantDigits++;
      mantissa = mantissa * 10 + (bytes[i]! - ZERO);
      exponent--;
      digits++;
      i++;
    }
  }
  if (digits === 0) {
    parseSpecial(bytes, i, end, negative, out);
    return;
  }
  if (i < end && (bytes[i] === 0x65 || bytes[i] === 0x45)) {
    integer = false;
    i++;
    let exponentNegative = false;
    if (i < end && (bytes[i] === PLUS || bytes[i] === MINUS)) {
      exponentNegative = bytes[i] === MINUS;
      i++;
    }
    const exponentStart = i;
    let written = 0;
    while (i < end && bytes[i]! >= ZERO && bytes[i]! <= NINE) {
      if (written < 1e6) written = written * 10 + (bytes[i]! - ZERO);
      i++;
    }
    if (i === exponentStart) return;
    exponent += exponentNegative ? -written : written;
  }
  if (i !== end) return;
  out.ok = true;
  out.integer = integer;
  if ((significantDigits <= 15 || (significantDigits === 16 && mantissa < EXACT_MANTISSA_LIMIT)) && exponent >= -22 && exponent <= 22) {
    const magnitude = exponent >= 0 ? mantissa * EXACT_POWERS_OF_TEN[exponent]! : mantissa / EXACT_POWERS_OF_TEN[-exponent]!;
    out.value = negative ? -magnitude : magnitude;
  } else {
    // Rare (long mantissas, large exponents): the engine's own correctly rounded conversion; the grammar is already checked.
    out.value = Number(bytes.toString('latin1', start, end));
  }
}

function parseSpecial(bytes: Buffer, start: number, end: number, negative: boolean, out: ParsedNumber): void {
  const length = end - start;
  if (length !== 3 && length !== 8) return;
  let word = '';
  for (let i = start; i < end; i++) word += String.fromCharCode(bytes[i]! | 0x20);
  if (word === 'nan') out.value = Number.NaN;
  else if (word === 'inf' || word === 'infinity') out.value = negative ? -Infinity : Infinity;
  else return;
  out.ok = true;
}
