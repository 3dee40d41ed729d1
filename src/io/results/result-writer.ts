// Writer of replay/listen result rows (t, position, velocity, level, alarms; the source power too for three or four
// detector outputs) as CSV or JSON Lines, every Nth sample.
import { alarmText } from '../../core/index.js';
import { integerInRange, OptionError, positiveFinite } from '../../core/options.js';
import { openFileSink, openStreamSink, type OutputSink } from '../capture/output-file.js';
import { writeAscii, writeFixedAscii } from '../capture/text-encode.js';

export type ResultFormat = 'csv' | 'jsonl';

/** The columns, in order; the CSV header line and the JSONL keys. */
export const RESULT_COLUMNS = ['t', 'position_m', 'velocity_m_s', 'level', 'alarms'] as const;
/** The columns with the source power (option `power`): after the level. */
export const RESULT_COLUMNS_WITH_POWER = ['t', 'position_m', 'velocity_m_s', 'level', 'power', 'alarms'] as const;

/** Decimal places written: t to 1 ns, position to 1 pm, velocity to 1 nm/s, level and power to 1e-6 of their scale. */
export const RESULT_DECIMALS = { t: 9, positionM: 12, velocityMS: 9, level: 6, power: 6 } as const;

export interface ResultWriterOptions {
  /** `csv` (header line, comma-separated) or `jsonl` (one JSON object per line); required. */
  format: ResultFormat;
  /** Write the rows whose absolute sample index is a multiple of `every`; integer in 1..1e9, default 1 (every row). */
  every?: number;
  /** Sample rate in Hz, for t = index / rateHz when a block has neither `t` nor `rateHz`; positive finite. */
  rateHz?: number;
  /** Stream used when the path is `-`; default process.stdout. */
  stdout?: NodeJS.WritableStream;
  /**
   * Write the source power of three or four detector outputs (1 = the calibration capture's mean) as a `power`
   * column after the level; every block must then carry `power`. `'auto'`: the first block decides (a column when it
   * carries `power`), for a live source whose output count the frames tell. Default false.
   */
  power?: boolean | 'auto';
}

/** One block of pipeline output; arrays hold at least `length` values. */
export interface ResultBlock {
  /** Absolute index of the block's first sample (0 = first sample of the capture). */
  readonly firstIndex: number;
  readonly length: number;
  /** Times in seconds; when absent or null, t = index / rateHz. */
  readonly t?: Float64Array | null;
  /** Sample rate in Hz for t = index / rateHz; overrides the writer's `rateHz` option for this block. */
  readonly rateHz?: number;
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  /** Alarm flag bits per sample (AlarmBit in src/core/alarms.ts). */
  readonly flags: Uint8Array;
  /** Source power per sample (the writer's `power` option). */
  readonly power?: Float32Array;
}

export interface ResultWriter {
  readonly path: string;
  readonly rowsWritten: number;
  /**
   * Adds the block's rows. The block is read during the call, before the promise is returned (its rows are
   * formatted into the writer's buffer then), so the caller may reuse the arrays at once; the bytes go out when
   * the buffer holds 64 KiB or more, and the promise settles when they are out (at once otherwise). Writes may
   * overlap (a live source can hand out several blocks at once): their bytes go out in order.
   */
  write(block: ResultBlock): Promise<void>;
  /** Flushes; a file is renamed from its temporary name to `path`. */
  close(): Promise<void>;
  /** A file: removes the temporary file. Standard output: stops writing (what was written stays; see docs). */
  abort(): Promise<void>;
}

/** The writer `createResultWriter` opens (a file or standard output). */
export interface ResultFileWriter extends ResultWriter {
  /**
   * As `write`, for a caller that waits only when it must (listen, once a block): the rows are formatted during the
   * call as there, and a promise (settling when the bytes are out) comes back only when bytes went out; otherwise
   * undefined, and nothing is allocated. A bad block or a closed or failed writer throws instead of rejecting.
   */
  add(block: ResultBlock): Promise<void> | undefined;
}

/** Bytes buffered before they are written; a block with more rows grows the buffer to hold them all. */
const ENCODE_BUFFER_BYTES = 65_536;
/** Room kept for one row: four numbers (toFixed gives at most ~45 chars below 1e21, more above), keys and all alarm names. */
const MAX_ROW_BYTES = 1024;

/** Alarm text of every flag byte, as bytes, built once so that rows cost no string building. */
const ALARM_CSV: readonly Buffer[] = Array.from({ length: 256 }, (_, flags) => Buffer.from(`${alarmText(flags)}\n`, 'latin1'));
const ALARM_JSON: readonly Buffer[] = Array.from({ length: 256 }, (_, flags) => Buffer.from(`"alarms":${JSON.stringify(alarmText(flags))}}\n`, 'latin1'));
const JSON_KEYS = ['{"t":', ',"position_m":', ',"velocity_m_s":', ',"level":', ',', ',"power":'].map((text) => Buffer.from(text, 'latin1'));
const COMMA = 0x2c;
/** What `write` returns when no bytes went out. */
const SETTLED: Promise<void> = Promise.resolve();

/** Opens `path` (`-` for standard output) for result rows; the header (CSV) is written with the first rows or at close. */
export async function createResultWriter(path: string, options: ResultWriterOptions): Promise<ResultFileWriter> {
  const format = options.format;
  if (format !== 'csv' && format !== 'jsonl') throw new OptionError('format', '"csv" or "jsonl"', format);
  const every = integerInRange('every', options.every ?? 1, 1, 1_000_000_000);
  const rateHz = options.rateHz === undefined ? null : positiveFinite('rateHz', options.rateHz);
  if (options.power !== undefined && options.power !== true && options.power !== false && options.power !== 'auto') throw new OptionError('power', "true, false or 'auto'", options.power);
  // Null until the first block decides ('auto').
  let withPower: boolean | null = options.power === 'auto' ? null : options.power === true;
  const sink: OutputSink = path === '-' ? openStreamSink(options.stdout ?? process.stdout) : await openFileSink(path);
  let buffer: Buffer = Buffer.allocUnsafe(ENCODE_BUFFER_BYTES + MAX_ROW_BYTES);
  let used = 0;
  let headerWritten = format === 'jsonl';
  let rowsWritten = 0;
  let failed = false;
  let finished = false;

  // Bytes being written: the buffer they are in goes with them and formatting goes on in another, so a write
  // called while an earlier one is out neither waits nor touches bytes in flight.
  let writing: Promise<void> = Promise.resolve();
  let spare: Buffer | null = null;

  /** Queues the buffered bytes after those already being written; settles when they are out. */
  function flush(): Promise<void> {
    if (used === 0) return writing;
    const out = buffer;
    const length = used;
    buffer = spare !== null && spare.length >= out.length ? spare : Buffer.allocUnsafe(out.length);
    spare = null;
    used = 0;
    writing = writing.then(async () => {
      await sink.write(out, length);
      spare = out;
    });
    return writing;
  }

  /** Doubles the buffer, keeping what it holds: the rows of one block are formatted before any is written. */
  function grow(): void {
    const grown = Buffer.allocUnsafe(2 * buffer.length);
    buffer.copy(grown, 0, 0, used);
    buffer = grown;
  }

  function checkUsable(): void {
    if (finished) throw new Error(`${path}: the result writer is closed`);
    if (failed) throw new Error(`${path}: an earlier write failed; call abort()`);
  }

  function writeHeader(): void {
    used = writeAscii(buffer, used, (withPower ? RESULT_COLUMNS_WITH_POWER : RESULT_COLUMNS).join(',') + '\n');
    headerWritten = true;
  }

  function checkBlock(block: ResultBlock): void {
    const { length } = block;
    if (!Number.isInteger(length) || length < 0) throw new RangeError(`block.length must be a non-negative integer (got ${length})`);
    if (!Number.isSafeInteger(block.firstIndex) || block.firstIndex < 0) {
      throw new RangeError(`block.firstIndex must be a non-negative integer (got ${block.firstIndex})`);
    }
    withPower ??= block.power !== undefined;
    if (withPower && block.power === undefined) throw new RangeError(`${path}: a block without power, for a writer with a power column`);
    checkLength('positionM', block.positionM, length);
    checkLength('velocityMS', block.velocityMS, length);
    checkLength('level', block.level, length);
    checkLength('flags', block.flags, length);
    if (block.t !== undefined && block.t !== null) checkLength('t', block.t, length);
    if (withPower) checkLength('power', block.power!, length);
    if (block.rateHz !== undefined) positiveFinite('block.rateHz', block.rateHz);
    else if ((block.t === undefined || block.t === null) && rateHz === null) {
      throw new RangeError(`${path}: a block without t needs a rate (block.rateHz or the rateHz option) to compute t = index / rateHz`);
    }
  }

  function add(block: ResultBlock): Promise<void> | undefined {
    checkUsable();
    checkBlock(block);
    try {
      if (!headerWritten) writeHeader();
      const { firstIndex, length, positionM, velocityMS, level, flags } = block;
      const power = withPower ? block.power! : null;
      const times = block.t ?? null;
      const blockRateHz = block.rateHz ?? rateHz!;
      // Rows are chosen on the absolute index, so the same rows come out however the stream is cut into blocks.
      const firstRow = Math.ceil(firstIndex / every) * every - firstIndex;
      for (let i = firstRow; i < length; i += every) {
        if (used > buffer.length - MAX_ROW_BYTES) grow();
        const t = times === null ? (firstIndex + i) / blockRateHz : times[i]!;
        const flagByte = flags[i]!;
        if (format === 'csv') {
          used = writeNumber(buffer, used, t, RESULT_DECIMALS.t, format);
          buffer[used++] = COMMA;
          used = writeNumber(buffer, used, positionM[i]!, RESULT_DECIMALS.positionM, format);
          buffer[used++] = COMMA;
          used = writeNumber(buffer, used, velocityMS[i]!, RESULT_DECIMALS.velocityMS, format);
          buffer[used++] = COMMA;
          used = writeNumber(buffer, used, level[i]!, RESULT_DECIMALS.level, format);
          buffer[used++] = COMMA;
          if (power !== null) {
            used = writeNumber(buffer, used, power[i]!, RESULT_DECIMALS.power, format);
            buffer[used++] = COMMA;
          }
          const alarms = ALARM_CSV[flagByte]!;
          buffer.set(alarms, used);
          used += alarms.length;
        } else {
          used = copy(buffer, used, JSON_KEYS[0]!);
          used = writeNumber(buffer, used, t, RESULT_DECIMALS.t, format);
          used = copy(buffer, used, JSON_KEYS[1]!);
          used = writeNumber(buffer, used, positionM[i]!, RESULT_DECIMALS.positionM, format);
          used = copy(buffer, used, JSON_KEYS[2]!);
          used = writeNumber(buffer, used, velocityMS[i]!, RESULT_DECIMALS.velocityMS, format);
          used = copy(buffer, used, JSON_KEYS[3]!);
          used = writeNumber(buffer, used, level[i]!, RESULT_DECIMALS.level, format);
          if (power !== null) {
            used = copy(buffer, used, JSON_KEYS[5]!);
            used = writeNumber(buffer, used, power[i]!, RESULT_DECIMALS.power, format);
          }
          used = copy(buffer, used, JSON_KEYS[4]!);
          used = copy(buffer, used, ALARM_JSON[flagByte]!);
        }
        rowsWritten++;
      }
      if (used < ENCODE_BUFFER_BYTES) return undefined;
      return flush().then(undefined, fail);
    } catch (error) {
      fail(error);
    }
  }

  /** A write that failed (formatting, or the bytes going out): the writer takes no further rows. */
  function fail(error: unknown): never {
    failed = true;
    throw error;
  }

  return {
    path,
    get rowsWritten() {
      return rowsWritten;
    },
    write(block) {
      try {
        return add(block) ?? SETTLED;
      } catch (error) {
        return Promise.reject(error);
      }
    },
    add,
    async close() {
      checkUsable();
      try {
        if (!headerWritten) writeHeader();
        await flush();
        finished = true;
        await sink.commit();
      } catch (error) {
        failed = true;
        finished = false;
        throw error;
      }
    },
    async abort() {
      finished = true;
      await sink.discard();
    },
  };
}

/**
 * Fixed-point text with `decimals` places, as ECMAScript toFixed writes it. Non-finite values: CSV writes `NaN`,
 * `Infinity`, `-Infinity`; JSON has no such numbers, so JSONL writes `null`.
 */
function writeNumber(bytes: Buffer, at: number, value: number, decimals: number, format: ResultFormat): number {
  if (Number.isFinite(value)) return writeFixedAscii(bytes, at, value, decimals);
  return writeAscii(bytes, at, format === 'csv' ? String(value) : 'null');
}

function checkLength(name: string, array: ArrayLike<number>, length: number): void {
  if (array.length < length) throw new RangeError(`block.${name} holds ${array.length} values, fewer than length ${length}`);
}

function copy(bytes: Buffer, at: number, text: Buffer): number {
  bytes.set(text, at);
  return at + text.length;
}
