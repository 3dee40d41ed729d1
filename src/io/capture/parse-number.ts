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

/** 10^k for k = 0..22 in a typed array, for the row loop. */
const POWERS = Float64Array.from(EXACT_POWERS_OF_TEN);
const LF = 0x0a;

/**
 * Whole rows of plain numbers, parsed in one pass over the bytes with the digits read as the delimiters are found
 * (no field scan before the number). A row is taken only when every field is `[+-]digits[.digits][(e|E)[+-]digits]`
 * with a mantissa under 2^53 and a power of ten within ±22 (Clinger's exact case, the same arithmetic as
 * parseNumberBytes, so the same doubles), fields end at a comma and the row at LF or CR LF within the bytes given,
 * and the row is within `maxLineBytes`. It stops at the first other row and leaves it to the general row parser,
 * which also reports errors.
 */
export class FastRowParser {
  /** Index after the newline of the last row taken. */
  position = 0;
  private readonly columns: number;
  private readonly xColumn: number;
  private readonly yColumn: number;
  private readonly tColumn: number;
  private readonly zColumn: number;
  private readonly wColumn: number;
  private readonly maxLineBytes: number;

  constructor(plan: { readonly names: readonly string[]; readonly x: number; readonly y: number; readonly t: number; readonly extra: readonly number[] }, maxLineBytes = 65_536) {
    this.columns = plan.names.length;
    this.xColumn = plan.x;
    this.yColumn = plan.y;
    this.tColumn = plan.t;
    this.zColumn = plan.extra[0] ?? -1;
    this.wColumn = plan.extra[1] ?? -1;
    this.maxLineBytes = maxLineBytes;
  }

  /** Parses rows from `start` into slots index, index + 1 … (up to `capacity`); returns how many. */
  parse(bytes: Uint8Array, start: number, limit: number, index: number, capacity: number, x: Float64Array, y: Float64Array, t: Float64Array | null, extra: readonly Float64Array[]): number {
    // Only whole rows: up to the last newline, so every row looked at ends inside the bytes and the scans below,
    // which stop at any byte that is not a digit, need no bounds checks.
    const end = bytes.lastIndexOf(LF, limit - 1) + 1;
    const columns = this.columns, xc = this.xColumn, yc = this.yColumn, tc = this.tColumn, zc = this.zColumn, wc = this.wColumn;
    const maxLine = this.maxLineBytes;
    // Byte values and tables as locals: module constants are context loads with a hole check each time.
    const minus = 0x2d, plus = 0x2b, point = 0x2e, zero = 0x30, nine = 0x39, comma = 0x2c, lf = 0x0a, cr = 0x0d, lowerE = 0x65, upperE = 0x45;
    const powers = POWERS, exactLimit = EXACT_MANTISSA_LIMIT;
    const z = zc >= 0 ? extra[0]! : null;
    const w = wc >= 0 ? extra[1]! : null;
    let slot = index;
    let at = start;
    rows: while (at < end && slot < capacity) {
      let i = at;
      for (let field = 0; field < columns; field++) {
        let c = bytes[i]!;
        let negative = false;
        if (c === minus || c === plus) {
          negative = c === minus;
          c = bytes[++i]!;
        }
        const digitsStart = i;
        let mantissa = 0;
        let exponent = 0;
        while (c >= zero && c <= nine) {
          mantissa = mantissa * 10 + (c - zero);
          c = bytes[++i]!;
        }
        if (c === point) {
          const pointAt = i;
          c = bytes[++i]!;
          while (c >= zero && c <= nine) {
            mantissa = mantissa * 10 + (c - zero);
            c = bytes[++i]!;
          }
          exponent = pointAt + 1 - i;
          if (i === digitsStart + 1) break rows; // a point without digits
        } else if (i === digitsStart) break rows;
        if (c === lowerE || c === upperE) {
          c = bytes[++i]!;
          let exponentNegative = false;
          if (c === minus || c === plus) {
            exponentNegative = c === minus;
            c = bytes[++i]!;
          }
          const exponentStart = i;
          let written = 0;
          while (c >= zero && c <= nine) {
            if (written < 1e6) written = written * 10 + (c - zero);
            c = bytes[++i]!;
          }
          if (i === exponentStart) break rows;
          exponent += exponentNegative ? -written : written;
        }
        if (field < columns - 1) {
          if (c !== comma) break rows;
        } else if (c === cr) {
          if (bytes[i + 1] !== lf) break rows;
          i++;
        } else if (c !== lf) break rows;
        // Digits accumulate exactly while under 2^53, and a sum at or past it never rounds back below it.
        if (!(mantissa < exactLimit) || exponent < -22 || exponent > 22) break rows;
        const magnitude = exponent >= 0 ? mantissa * powers[exponent]! : mantissa / powers[-exponent]!;
        const value = negative ? -magnitude : magnitude;
        if (field === xc) x[slot] = value;
        if (field === yc) y[slot] = value;
        if (field === tc && t !== null) t[slot] = value;
        if (field === zc && z !== null) z[slot] = value;
        if (field === wc && w !== null) w[slot] = value;
        i++;
      }
      // The line's content (without its CR LF) within the limit the row parser applies.
      if (i - at - (bytes[i - 2] === cr ? 2 : 1) > maxLine) break;
      at = i;
      slot++;
    }
    this.position = at;
    return slot - index;
  }
}
