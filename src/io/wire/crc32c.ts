// CRC-32C (Castagnoli; catalogue name CRC-32/ISCSI): poly 0x1EDC6F41 reflected (0x82F63B78),
// init 0xFFFFFFFF, refin/refout true, xorout 0xFFFFFFFF, check value 0xE3069283 over "123456789".

const REFLECTED_POLY = 0x82f63b78;

/** One 256-entry table for byte-at-a-time updates (1 KiB, built once at load). */
const table = buildTable();

function buildTable(): Uint32Array {
  const entries = new Uint32Array(256);
  for (let byte = 0; byte < 256; byte++) {
    let crc = byte;
    for (let bit = 0; bit < 8; bit++) crc = crc & 1 ? (crc >>> 1) ^ REFLECTED_POLY : crc >>> 1;
    entries[byte] = crc >>> 0;
  }
  return entries;
}

/**
 * CRC-32C of `bytes[start, end)`. Allocation-free; returns an unsigned 32-bit integer.
 */
export function crc32c(bytes: Uint8Array, start = 0, end = bytes.length): number {
  let crc = 0xffffffff;
  for (let i = start; i < end; i++) crc = table[(crc ^ bytes[i]!) & 0xff]! ^ (crc >>> 8);
  return (crc ^ 0xffffffff) >>> 0;
}
