// Writing numbers as ASCII into a byte buffer, shared by the capture and result writers.

const MINUS = 0x2d;
const ZERO = 0x30;

/** Writes a safe integer in decimal at `at`; returns the position after it. The caller leaves 22 bytes of room. */
export function writeIntegerAscii(bytes: Uint8Array, at: number, value: number): number {
  if (value < 0) {
    bytes[at++] = MINUS;
    value = -value;
  }
  if (value < 10) {
    bytes[at] = ZERO + value;
    return at + 1;
  }
  let digits = 1;
  for (let scale = 10; scale <= value; scale *= 10) digits++;
  const end = at + digits;
  for (let i = end - 1; i >= at; i--) {
    const quotient = Math.floor(value / 10);
    bytes[i] = ZERO + (value - quotient * 10);
    value = quotient;
  }
  return end;
}

/** Writes an ASCII string at `at`; returns the position after it. */
export function writeAscii(bytes: Buffer, at: number, text: string): number {
  return at + bytes.write(text, at, 'latin1');
}

const POINT = 0x2e;
const POWERS_OF_TEN = Array.from({ length: 16 }, (_, k) => 10 ** k);
/** Scaled values below 2^42 carry an absolute error under 2^-11 from the one multiplication, far from a rounding tie. */
const FAST_FIXED_LIMIT = 2 ** 42;
const TIE_GUARD = 1e-3;

/**
 * Writes `value.toFixed(decimals)` (decimals 0..15) as bytes at `at` without building a string, and returns the
 * position after it. The result is the same text as toFixed: values whose scaled form is large or lies near a
 * rounding tie take toFixed itself. The caller leaves 40 bytes of room and passes finite values only.
 */
export function writeFixedAscii(bytes: Buffer, at: number, value: number, decimals: number): number {
  const negative = value < 0;
  const scaled = (negative ? -value : value) * POWERS_OF_TEN[decimals]!;
  const fraction = scaled - Math.floor(scaled);
  if (!(scaled < FAST_FIXED_LIMIT) || Math.abs(fraction - 0.5) < TIE_GUARD) return writeAscii(bytes, at, value.toFixed(decimals));
  let digits = Math.round(scaled);
  if (negative) bytes[at++] = MINUS;
  // Integer part at least one digit ("0.25"), then exactly `decimals` digits after the point.
  let length = 1;
  for (let scale = 10; scale <= digits; scale *= 10) length++;
  const total = Math.max(length, decimals + 1) + (decimals > 0 ? 1 : 0);
  let position = at + total - 1;
  for (let k = 0; k < decimals; k++) {
    const quotient = Math.floor(digits / 10);
    bytes[position--] = ZERO + (digits - quotient * 10);
    digits = quotient;
  }
  if (decimals > 0) bytes[position--] = POINT;
  do {
    const quotient = Math.floor(digits / 10);
    bytes[position--] = ZERO + (digits - quotient * 10);
    digits = quotient;
  } while (position >= at);
  return at + total;
}
