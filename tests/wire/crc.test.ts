import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createWireCrcKernel } from '../../src/accel/wire-crc.js';
import { crc32cWords } from '../../src/io/wire/crc32c.js';
import { crc32c } from '../../src/io/wire/index.js';
import { buildFirmwareProgram, type FirmwareProgram } from './firmware-c.js';

const ascii = (text: string) => Uint8Array.from(Buffer.from(text, 'ascii'));
const run = (length: number, byteAt: (i: number) => number) => Uint8Array.from({ length }, (_, i) => byteAt(i));

// Check value: catalogue of parametrised CRC algorithms, CRC-32C row of docs/references.md (third-party doc).
const CATALOGUE_CHECK = { input: ascii('123456789'), crc: 0xe3069283 };
// 32-byte examples from RFC 3720 (iSCSI) appendix B.4, CRC-32C (memory: recalled, confirmed here by agreeing
// with the catalogue check through the same code and with the independent C implementation).
const RFC3720_EXAMPLES = [
  { name: '32 bytes of zeros', input: run(32, () => 0x00), crc: 0x8a9136aa },
  { name: '32 bytes of 0xFF', input: run(32, () => 0xff), crc: 0x62a8ab43 },
  { name: '32 incrementing bytes 00..1F', input: run(32, (i) => i), crc: 0x46dd794e },
  { name: '32 decrementing bytes 1F..00', input: run(32, (i) => 31 - i), crc: 0x113fdb5c },
];

/** The definition, a bit at a time (reflected polynomial 0x82F63B78, catalogue parameters above). */
function bitwise(bytes: Uint8Array, start: number, end: number): number {
  let crc = 0xffffffff;
  for (let i = start; i < end; i++) {
    crc ^= bytes[i]!;
    for (let bit = 0; bit < 8; bit++) crc = crc & 1 ? (crc >>> 1) ^ 0x82f63b78 : crc >>> 1;
  }
  return (crc ^ 0xffffffff) >>> 0;
}

describe('CRC-32C (TypeScript)', () => {
  it('gives the catalogue check value 0xE3069283 for "123456789"', () => {
    expect(crc32c(CATALOGUE_CHECK.input)).toBe(CATALOGUE_CHECK.crc);
  });

  it.each(RFC3720_EXAMPLES)('gives the RFC 3720 B.4 value for $name', ({ input, crc }) => {
    expect(crc32c(input)).toBe(crc);
  });

  it('covers exactly [start, end) of the buffer', () => {
    const padded = new Uint8Array(13);
    padded.set(CATALOGUE_CHECK.input, 2);
    padded[0] = 0x55;
    padded[12] = 0xaa;
    expect(crc32c(padded, 2, 11)).toBe(CATALOGUE_CHECK.crc);
    expect(crc32c(new Uint8Array(0))).toBe(0);
  });

  // The table-driven code (eight bytes a step, then single bytes) against the definition a bit at a time
  // (reflected polynomial 0x82F63B78, catalogue parameters above), over every length and alignment of a range.
  it('equals the bit-at-a-time definition for any bytes and range', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 80 }), fc.nat(), fc.nat(), fc.nat({ max: 7 }), (bytes, a, b, offset) => {
        const start = bytes.length === 0 ? 0 : a % (bytes.length + 1);
        const end = start + (b % (bytes.length - start + 1));
        const expected = bitwise(bytes, start, end);
        expect(crc32c(bytes, start, end)).toBe(expected);
        expect(crc32c(Buffer.from(bytes), start, end)).toBe(expected);
        // The word loop (little-endian hosts) at every alignment of the bytes in their memory.
        const memory = new ArrayBuffer(bytes.length + offset + 5);
        const placed = new Uint8Array(memory, offset, bytes.length);
        placed.set(bytes);
        expect(crc32cWords(placed, new Int32Array(memory, 0, memory.byteLength >> 2), start, end)).toBe(expected);
      }),
      { numRuns: 500 },
    );
  });
});

// The wire decoder's WebAssembly kernel (src/accel/wire-crc.ts): sixteen bytes a step, then single bytes.
describe('CRC-32C (WebAssembly kernel)', () => {
  const kernel = createWireCrcKernel(4096)!;
  const crcOf = (input: Uint8Array, at = 0): number => {
    kernel.bytes.set(input, at);
    return kernel.crc32c(at, at + input.length);
  };

  it('gives the catalogue check value and the RFC 3720 B.4 values', () => {
    expect(crcOf(CATALOGUE_CHECK.input, 3)).toBe(CATALOGUE_CHECK.crc);
    for (const { input, crc } of RFC3720_EXAMPLES) expect(crcOf(input, 1)).toBe(crc);
    expect(kernel.crc32c(5, 5)).toBe(0);
  });

  it('equals the bit-at-a-time definition for any bytes, range and place in its memory', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 300 }), fc.nat(), fc.nat(), fc.nat({ max: 3000 }), (bytes, a, b, at) => {
        const start = bytes.length === 0 ? 0 : a % (bytes.length + 1);
        const end = start + (b % (bytes.length - start + 1));
        kernel.bytes.set(bytes, at);
        expect(kernel.crc32c(at + start, at + end)).toBe(bitwise(bytes, start, end));
      }),
      { numRuns: 500 },
    );
  });
});

describe('CRC-32C (C header, built with gcc)', () => {
  let program: FirmwareProgram;
  beforeAll(() => {
    program = buildFirmwareProgram();
  });
  afterAll(() => program?.remove());

  it('gives the catalogue check value and the RFC 3720 B.4 values', () => {
    const inputs = [CATALOGUE_CHECK, ...RFC3720_EXAMPLES];
    const lines = program.run(inputs.map((v) => `crc ${Buffer.from(v.input).toString('hex')}`));
    expect(lines).toEqual(inputs.map((v) => v.crc.toString(16).padStart(8, '0')));
  });
});
