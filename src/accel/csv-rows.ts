// The CSV capture reader's common case in WebAssembly (csv-rows.wat): whole rows of plain numbers, with the same
// doubles as the JavaScript row parser. The reader's byte buffer
// and its block arrays live in the kernel's memory, so nothing is copied between them.
import { integerInRange } from '../core/index.js';
import { CSV_ROWS_WASM_BASE64 } from './csv-rows-wasm.js';
import { instantiate } from './wasm.js';

interface KernelExports {
  readonly memory: WebAssembly.Memory;
  readonly position: { readonly value: number };
  configure(columns: number, maxLine: number, destinations: number, copies: number, copyCount: number): void;
  rows(start: number, limit: number, slot: number, capacity: number): number;
}

/** Which columns of a row feed which output (0-based; a column may feed several). */
export interface CsvRowColumns {
  /** Fields per row. */
  readonly columns: number;
  readonly x: number;
  readonly y: number;
  /** -1: no time column. */
  readonly t: number;
  /** Columns of outputs 3 and 4, as many as the kernel was made for. */
  readonly extra: readonly number[];
  /** Longest row content (without its line ending) taken, in bytes. */
  readonly maxLineBytes: number;
}

export interface CsvRowKernel {
  /** The byte buffer the rows are parsed from (`byteCapacity` bytes). */
  readonly bytes: Uint8Array;
  /** Output arrays of `blockSize` samples each: x, y, times, and outputs 3 and 4. */
  readonly x: Float64Array;
  readonly y: Float64Array;
  readonly t: Float64Array;
  readonly extra: readonly Float64Array[];
  /** Sets the column layout; before the first `rows`. */
  configure(columns: CsvRowColumns): void;
  /**
   * Parses whole rows of plain numbers from `bytes[start]` (rows ending before `limit`) into slots `index`,
   * `index + 1` … below `capacity` of the output arrays, and returns how many; `position` is then the index after
   * the last row taken. It stops at the first row that is not `[+-]digits[.digits][(e|E)[+-]digits]` fields
   * (at most 18 digits, a mantissa under 2^53, a power of ten within ±22) separated by commas and ended by LF or
   * CR LF, or that is longer than `maxLineBytes`: the caller's general parser takes that row.
   */
  rows(start: number, limit: number, index: number, capacity: number): number;
  readonly position: number;
}

/** Bytes below the buffer: powers of ten and a byte class table (csv-rows.wat). */
const POWERS_BYTES = 512;
/** Most columns a row can have: a header of at most 65 536 bytes names at most 32 769 (one byte each, commas between). */
const MAX_COLUMNS = 32_769;
const PAGE_BYTES = 65_536;

/**
 * A kernel with a byte buffer of `byteCapacity` bytes (1..2^27) and `outputs` (2..4) arrays of `blockSize`
 * samples (1..2^20) plus one for times, or null where WebAssembly is missing: the caller then keeps its
 * JavaScript parser.
 */
export function createCsvRowKernel(byteCapacity: number, blockSize: number, outputs: number): CsvRowKernel | null {
  integerInRange('byteCapacity', byteCapacity, 1, 2 ** 27);
  integerInRange('blockSize', blockSize, 1, 2 ** 20);
  integerInRange('outputs', outputs, 2, 4);
  const instance = instantiate<KernelExports>(CSV_ROWS_WASM_BASE64);
  if (instance === null) return null;
  const kernel: KernelExports = instance;
  const arrayBytes = blockSize * 8;
  const arraysAt = Math.ceil((POWERS_BYTES + byteCapacity) / 8) * 8;
  // x, y, the extra outputs, times, a sink for the columns not read; then each column's destination and the byte
  // that ends it, and the copies (at most 4 pairs) for outputs whose column feeds another.
  const destinationsAt = arraysAt + (outputs + 2) * arrayBytes;
  const copiesAt = destinationsAt + 8 * MAX_COLUMNS;
  const total = copiesAt + 32;
  const pages = Math.ceil(total / PAGE_BYTES);
  try {
    // All memory at once: growing later would detach the views handed out below.
    kernel.memory.grow(pages - kernel.memory.buffer.byteLength / PAGE_BYTES);
  } catch {
    return null; // no room for WebAssembly memory of this size here
  }
  const memory = kernel.memory.buffer;
  const offset = (k: number): number => arraysAt + k * arrayBytes;
  const x = new Float64Array(memory, offset(0), blockSize);
  const y = new Float64Array(memory, offset(1), blockSize);
  const extra = Array.from({ length: outputs - 2 }, (_, k) => new Float64Array(memory, offset(2 + k), blockSize));
  const t = new Float64Array(memory, offset(outputs), blockSize);
  const rows = kernel.rows;
  const position = kernel.position;
  return {
    bytes: new Uint8Array(memory, POWERS_BYTES, byteCapacity),
    x,
    y,
    t,
    extra,
    configure(columns) {
      integerInRange('columns', columns.columns, 1, MAX_COLUMNS);
      if (columns.extra.length > outputs - 2) throw new RangeError(`extra must list at most ${outputs - 2} columns (got ${columns.extra.length})`);
      const sink = offset(outputs + 1);
      const table = new Int32Array(memory, destinationsAt, 2 * columns.columns);
      const destinations = new Int32Array(columns.columns).fill(sink);
      const copies = new Int32Array(memory, copiesAt, 8);
      let copyCount = 0;
      const wanted: [number, number][] = [
        [columns.x, offset(0)],
        [columns.y, offset(1)],
        [columns.t, offset(outputs)],
        ...columns.extra.map((column, k): [number, number] => [column, offset(2 + k)]),
      ];
      for (const [column, to] of wanted) {
        if (column === -1) continue;
        integerInRange('column', column, 0, columns.columns - 1);
        if (destinations[column] === sink) destinations[column] = to;
        else {
          copies[2 * copyCount] = to;
          copies[2 * copyCount + 1] = destinations[column]!;
          copyCount++;
        }
      }
      destinations.forEach((to, column) => {
        table[2 * column] = to;
        table[2 * column + 1] = column < columns.columns - 1 ? 0x2c : 0x0a;
      });
      kernel.configure(columns.columns, integerInRange('maxLineBytes', columns.maxLineBytes, 0, 65_536), destinationsAt, copiesAt, copyCount);
    },
    rows(start, limit, index, capacity) {
      // Byte indices are the caller's, relative to `bytes`; the kernel's are memory offsets.
      return rows(start + POWERS_BYTES, limit + POWERS_BYTES, index, Math.min(capacity, blockSize));
    },
    get position() {
      return position.value - POWERS_BYTES;
    },
  };
}
