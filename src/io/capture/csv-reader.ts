// Streaming CSV capture reader: a header line, `# key: value` metadata, numeric columns, read in fixed-size chunks.
import type { FileHandle } from 'node:fs/promises';
import { createCsvRowKernel } from '../../accel/csv-rows.js';
import { CaptureFormatError } from './errors.js';
import { parseAdcMetadata, parseMetadataLine, parseRateMetadata, RATE_KEY } from './metadata.js';
import { createParsedNumber, FastRowParser, parseNumberBytes, type ParsedNumber } from './parse-number.js';
import type { ResolvedCaptureOptions } from './resolved-options.js';
import { singlePassCapture } from './single-pass.js';
import type { Capture, CaptureInfo, ChannelSelector, RateSource } from './types.js';

/** Longest line the reader accepts; a longer one is reported, so memory stays bounded on a file without newlines. */
export const MAX_CSV_LINE_BYTES = 65_536;
/** Bytes of data rows looked at when the file is opened, to judge the encoding and estimate the rate from `t`. */
const PEEK_BYTES = 65_536;
const PEEK_ROWS = 64;

const LF = 0x0a;
const CR = 0x0d;
const COMMA = 0x2c;
const HASH = 0x23;

const enum RowStatus {
  Ok,
  Skip,
  ColumnCount,
  NotNumber,
}

/** Column layout of a file and the 0-based columns picked from it. */
interface ColumnPlan {
  readonly names: readonly string[];
  readonly x: number;
  readonly y: number;
  /** Columns of outputs 3 and 4, when asked for. */
  readonly extra: readonly number[];
  /** -1 when no time column is used. */
  readonly t: number;
}

export async function openCsvCapture(file: string, handle: FileHandle, options: ResolvedCaptureOptions): Promise<Capture> {
  // Room for the longest allowed line with its CR LF carried over, plus a whole chunk.
  const capacity = options.readChunkBytes + MAX_CSV_LINE_BYTES + 2;
  // Where WebAssembly exists, the common rows are parsed there: the bytes and the block arrays live in its memory.
  const kernel = createCsvRowKernel(capacity, options.blockSize, 2 + options.extraChannels.length);
  const buffer = kernel === null ? Buffer.allocUnsafe(capacity) : Buffer.from(kernel.bytes.buffer, kernel.bytes.byteOffset, capacity);
  let bufferStart = 0;
  let bufferEnd = 0;
  /** File offset of `buffer[bufferEnd]`. */
  let filePosition = 0;
  let endOfFile = false;
  /** 1-based number of the line that starts at `bufferStart`. */
  let lineNumber = 1;

  // The next chunk is read while this one is parsed (the read runs on libuv's thread pool), then copied in.
  const staging = Buffer.allocUnsafe(options.readChunkBytes);
  let ahead: Promise<number> | null = null;

  function readAhead(): void {
    ahead = handle.read(staging, 0, options.readChunkBytes, filePosition).then((result) => result.bytesRead);
    // Awaited (and so thrown) by the next refill; this only keeps a pass that ends early from leaving it unhandled.
    ahead.catch(() => undefined);
  }

  /** Keeps the unconsumed tail, takes the next chunk after it; false at the end of the file. */
  async function refill(): Promise<boolean> {
    if (endOfFile) return false;
    const carried = bufferEnd - bufferStart;
    // No newline in the carried bytes: beyond the limit and a CR, the line is too long whatever follows.
    if (carried > MAX_CSV_LINE_BYTES + 1) throw lineTooLong(carried);
    if (bufferStart > 0) {
      buffer.copy(buffer, 0, bufferStart, bufferEnd);
      bufferStart = 0;
      bufferEnd = carried;
    }
    if (ahead === null) readAhead();
    const bytesRead = await ahead!;
    ahead = null;
    if (bytesRead === 0) {
      endOfFile = true;
      return false;
    }
    // Room: at most MAX_CSV_LINE_BYTES + 1 bytes are carried, and the buffer holds a chunk beyond that.
    staging.copy(buffer, bufferEnd, 0, bytesRead);
    bufferEnd += bytesRead;
    filePosition += bytesRead;
    readAhead();
    return true;
  }

  function lineTooLong(length: number): CaptureFormatError {
    return new CaptureFormatError({
      file,
      line: lineNumber,
      expected: `a line of at most ${MAX_CSV_LINE_BYTES} bytes (line ending not counted)`,
      got: `${length > MAX_CSV_LINE_BYTES + 1 ? 'more than ' : ''}${Math.min(length, MAX_CSV_LINE_BYTES + 1)} bytes: ${buffer.toString('latin1', bufferStart, bufferStart + 60)}`,
    });
  }

  /** The limit holds for every line, whatever the read chunk size brought in with it. */
  function checkLineLength(newline: number): void {
    const length = contentEnd(buffer, bufferStart, newline) - bufferStart;
    if (length > MAX_CSV_LINE_BYTES) throw lineTooLong(length);
  }

  /** Index of the newline ending the line at `bufferStart`, bufferEnd for a last line without one, -1 at the end. */
  async function nextLineEnd(): Promise<number> {
    for (;;) {
      const newline = buffer.indexOf(LF, bufferStart);
      if (newline !== -1 && newline < bufferEnd) return newline;
      if (!(await refill())) return bufferStart < bufferEnd ? bufferEnd : -1;
    }
  }

  function lineText(start: number, newline: number): string {
    return buffer.toString('utf8', start, contentEnd(buffer, start, newline));
  }

  // Preamble: metadata and comment lines, blank lines, the header; stops at the first data row without consuming it.
  const metadata = new Map<string, string>();
  const metadataLines = new Map<string, number>();
  let header: string[] | null = null;
  let headerLine = 0;
  for (;;) {
    const newline = await nextLineEnd();
    if (newline === -1) break;
    checkLineLength(newline);
    if (lineNumber === 1 && buffer[bufferStart] === 0xef && buffer[bufferStart + 1] === 0xbb && buffer[bufferStart + 2] === 0xbf) {
      bufferStart += 3;
    }
    const text = lineText(bufferStart, newline);
    const blank = text.trim() === '';
    if (!blank && text.startsWith('#')) {
      const entry = parseMetadataLine(text);
      if (entry !== null) {
        metadata.set(entry[0], entry[1]);
        metadataLines.set(entry[0], lineNumber);
      }
    } else if (!blank && header === null) {
      header = parseHeader(file, lineNumber, text);
      headerLine = lineNumber;
    } else if (!blank) {
      break;
    }
    bufferStart = Math.min(newline + 1, bufferEnd);
    lineNumber++;
  }
  if (header === null) {
    throw new CaptureFormatError({ file, line: lineNumber, expected: 'a header line naming the columns (e.g. "t,x,y") before the end of the file' });
  }
  const plan = planColumns(file, headerLine, header, options);
  const rowParser = new CsvRowParser(plan);
  const extraBuffers = kernel?.extra ?? plan.extra.map(() => new Float64Array(options.blockSize));
  rowParser.extra = extraBuffers;

  function rowError(status: RowStatus, text: string, line: number): CaptureFormatError {
    const columns = `(${plan.names.join(',')})`;
    if (status === RowStatus.ColumnCount) {
      return new CaptureFormatError({ file, line, expected: `${plan.names.length} columns ${columns}`, got: text });
    }
    return new CaptureFormatError({
      file,
      line,
      expected: `a number in column "${plan.names[rowParser.badField]}" (column ${rowParser.badField + 1} of ${plan.names.join(',')})`,
      got: text,
    });
  }

  /**
   * Looks at the first data rows through a separate fixed-size read, so what is judged from them does not depend on
   * the read chunk size. A malformed row ends the look; the main pass reports it in order.
   */
  async function peekRows(offset: number): Promise<PeekResult> {
    const bytes = Buffer.alloc(PEEK_BYTES);
    const { bytesRead } = await handle.read(bytes, 0, PEEK_BYTES, offset);
    const x = new Float64Array(PEEK_ROWS);
    const y = new Float64Array(PEEK_ROWS);
    const t = plan.t === -1 ? null : new Float64Array(PEEK_ROWS);
    let allInteger = true;
    let rows = 0;
    let start = 0;
    while (rows < PEEK_ROWS && start < bytesRead) {
      const newline = rowParser.parse(bytes, start, bytesRead, bytesRead < PEEK_BYTES, rows, x, y, t);
      if (newline === -1) break;
      if (rowParser.status === RowStatus.Ok) {
        allInteger &&= rowParser.rowIsInteger;
        rows++;
      } else if (rowParser.status !== RowStatus.Skip) break;
      start = newline + 1;
    }
    return { allInteger: rows > 0 && allInteger, rows, firstTime: t?.[0] ?? Number.NaN, lastTime: t?.[rows - 1] ?? Number.NaN };
  }

  const peek = await peekRows(filePosition - (bufferEnd - bufferStart));
  const { rateHz, rateSource } = resolveRate(file, options.rateHz, metadata, metadataLines, plan, peek, headerLine);
  const info: CaptureInfo = Object.freeze({
    file,
    format: 'csv',
    rateHz,
    rateSource,
    channelNames: Object.freeze([...plan.names]),
    xChannel: plan.names[plan.x]!,
    yChannel: plan.names[plan.y]!,
    channels: Object.freeze([plan.x, plan.y, ...plan.extra].map((column) => plan.names[column]!)),
    timeColumn: plan.t === -1 ? null : plan.names[plan.t]!,
    sampleEncoding: peek.allInteger ? 'integer-text' : 'decimal-text',
    totalSamples: null,
    metadata,
    adc: parseAdcMetadata(metadata, { file, line: metadataLines.get('adc') ?? headerLine }),
    warnings: Object.freeze([]),
  });

  const blockSize = options.blockSize;
  const xBuffer = kernel?.x ?? new Float64Array(blockSize);
  const yBuffer = kernel?.y ?? new Float64Array(blockSize);
  const tBuffer = plan.t === -1 ? null : (kernel?.t ?? new Float64Array(blockSize));
  let pendingError: Error | null = null;
  kernel?.configure({ columns: plan.names.length, x: plan.x, y: plan.y, t: plan.t, extra: plan.extra, maxLineBytes: MAX_CSV_LINE_BYTES });
  const fastRows = kernel === null ? new FastRowParser(plan, MAX_CSV_LINE_BYTES) : null;

  async function fillBlock(): Promise<number> {
    if (pendingError !== null) throw pendingError;
    let count = 0;
    try {
      while (count < blockSize) {
        if (bufferStart === bufferEnd && !(await refill())) break;
        // Whole rows of plain numbers in one pass over the chunk; anything else (a comment, a blank or bad row, a
        // number the fast path does not take, the chunk's last partial line) goes to the row parser below.
        const rows = fastRows === null ? kernel!.rows(bufferStart, bufferEnd, count, blockSize) : fastRows.parse(buffer, bufferStart, bufferEnd, count, blockSize, xBuffer, yBuffer, tBuffer, extraBuffers);
        if (rows > 0) {
          count += rows;
          lineNumber += rows;
          bufferStart = fastRows === null ? kernel!.position : fastRows.position;
          continue;
        }
        const newline = rowParser.parse(buffer, bufferStart, bufferEnd, endOfFile, count, xBuffer, yBuffer, tBuffer);
        if (newline === -1) {
          await refill();
          continue;
        }
        checkLineLength(newline);
        const status = rowParser.status;
        if (status === RowStatus.Ok) count++;
        else if (status !== RowStatus.Skip) throw rowError(status, lineText(bufferStart, newline), lineNumber);
        bufferStart = Math.min(newline + 1, bufferEnd);
        lineNumber++;
      }
    } catch (error) {
      if (count === 0) throw error;
      pendingError = error as Error;
    }
    return count;
  }

  return singlePassCapture(info, handle, { x: xBuffer, y: yBuffer, extra: extraBuffers, t: tBuffer }, fillBlock);
}

/** End of a line's content: before the newline and an optional carriage return. */
function contentEnd(bytes: Uint8Array, start: number, newline: number): number {
  return newline > start && bytes[newline - 1] === CR ? newline - 1 : newline;
}

function isBlank(bytes: Uint8Array, start: number, end: number): boolean {
  for (let i = start; i < end; i++) if (bytes[i] !== 0x20 && bytes[i] !== 0x09) return false;
  return true;
}

/** Parses data rows of one column layout; a class so that every capture calls the same method (one call target for the optimiser). */
class CsvRowParser {
  /** x and y of the last row parsed were plain integers. */
  rowIsInteger = true;
  /** 0-based column of the first non-number in the last row reported as NotNumber. */
  badField = 0;
  /** Outcome of the last `parse`. */
  status: RowStatus = RowStatus.Skip;
  private readonly parsed: ParsedNumber = createParsedNumber();
  private readonly columns: number;
  private readonly xColumn: number;
  private readonly yColumn: number;
  private readonly tColumn: number;
  /** Columns of outputs 3 and 4 (-1: none), and the arrays they are written to (set once the block buffers exist). */
  private readonly zColumn: number;
  private readonly wColumn: number;
  extra: readonly Float64Array[] = [];

  constructor(plan: ColumnPlan) {
    this.columns = plan.names.length;
    this.xColumn = plan.x;
    this.yColumn = plan.y;
    this.tColumn = plan.t;
    this.zColumn = plan.extra[0] ?? -1;
    this.wColumn = plan.extra[1] ?? -1;
  }

  /**
   * Parses the line starting at `start` into slot `index` of the arrays, scanning for its newline as it goes.
   * Returns the index of the newline, `limit` for a last line without one (when `atEnd`), or -1 when the line runs
   * past `limit` and more bytes are needed. The outcome is left in `status`.
   */
  parse(bytes: Buffer, start: number, limit: number, atEnd: boolean, index: number, x: Float64Array, y: Float64Array, t: Float64Array | null): number {
    if (start < limit && bytes[start] === HASH) {
      const newline = bytes.indexOf(LF, start);
      this.status = RowStatus.Skip;
      return newline !== -1 && newline < limit ? newline : atEnd ? limit : -1;
    }
    const parsed = this.parsed;
    let field = 0;
    let fieldStart = start;
    let notNumber = -1;
    let integer = true;
    let i = start;
    for (;;) {
      let fieldEnd: number;
      if (i === limit) {
        if (!atEnd) return -1;
        fieldEnd = i > fieldStart && bytes[i - 1] === CR ? i - 1 : i;
      } else {
        const byte = bytes[i];
        if (byte === LF) fieldEnd = i > fieldStart && bytes[i - 1] === CR ? i - 1 : i;
        else if (byte === COMMA) fieldEnd = i;
        else {
          i++;
          continue;
        }
      }
      if (field === this.xColumn || field === this.yColumn || field === this.tColumn || field === this.zColumn || field === this.wColumn) {
        parseNumberBytes(bytes, fieldStart, fieldEnd, parsed);
        if (!parsed.ok) {
          if (notNumber === -1) notNumber = field;
        } else {
          if (field === this.xColumn) x[index] = parsed.value;
          if (field === this.yColumn) y[index] = parsed.value;
          if (field === this.tColumn && t !== null) t[index] = parsed.value;
          // The look at the first rows writes here too, harmlessly: the block pass rewrites every slot it delivers.
          if (field === this.zColumn) this.extra[0]![index] = parsed.value;
          if (field === this.wColumn) this.extra[1]![index] = parsed.value;
          if (field !== this.tColumn && !parsed.integer) integer = false;
        }
      }
      field++;
      if (i === limit || bytes[i] === LF) break;
      i++;
      fieldStart = i;
    }
    this.rowIsInteger = integer;
    if ((field !== this.columns || notNumber !== -1) && isBlank(bytes, start, contentEnd(bytes, start, i))) {
      this.status = RowStatus.Skip;
    } else if (field !== this.columns) {
      this.status = RowStatus.ColumnCount;
    } else if (notNumber !== -1) {
      this.badField = notNumber;
      this.status = RowStatus.NotNumber;
    } else this.status = RowStatus.Ok;
    return i;
  }
}

function parseHeader(file: string, line: number, text: string): string[] {
  const names = text.split(',').map((name) => name.trim().replace(/^"(.*)"$/, '$1').trim());
  const numeric = names.every((name) => name !== '' && Number.isFinite(Number(name)));
  if (numeric || names.some((name) => name === '')) {
    throw new CaptureFormatError({ file, line, expected: 'a header line of non-empty column names (e.g. "t,x,y")', got: text });
  }
  const duplicate = names.find((name, index) => names.indexOf(name) !== index);
  if (duplicate !== undefined) {
    throw new CaptureFormatError({ file, line, expected: `distinct column names (column "${duplicate}" appears twice)`, got: text });
  }
  return names;
}

function planColumns(file: string, line: number, names: readonly string[], options: ResolvedCaptureOptions): ColumnPlan {
  const find = (option: string, selector: ChannelSelector): number => {
    const index = typeof selector === 'number' ? selector - 1 : names.indexOf(selector);
    if (index < 0 || index >= names.length) {
      const wanted = typeof selector === 'number' ? `a column number ${selector} (1-based)` : `a column named "${selector}"`;
      throw new CaptureFormatError({ file, line, expected: `${wanted} for option ${option}, in header`, got: names.join(',') });
    }
    return index;
  };
  const x = find('xChannel', options.xChannel ?? 'x');
  const y = find('yChannel', options.yChannel ?? 'y');
  const extra = options.extraChannels.map((selector, index) => find(`channels[${index + 2}]`, selector));
  let t = -1;
  if (options.timeColumn === undefined) t = names.indexOf('t');
  else if (options.timeColumn !== null) t = find('timeColumn', options.timeColumn);
  return { names, x, y, extra, t };
}

interface PeekResult {
  /** x and y of every looked-at row were plain integers (false when no row was seen). */
  readonly allInteger: boolean;
  readonly rows: number;
  readonly firstTime: number;
  readonly lastTime: number;
}

function resolveRate(
  file: string,
  optionRateHz: number | null,
  metadata: ReadonlyMap<string, string>,
  metadataLines: ReadonlyMap<string, number>,
  plan: ColumnPlan,
  peek: PeekResult,
  headerLine: number,
): { rateHz: number; rateSource: RateSource } {
  if (optionRateHz !== null) return { rateHz: optionRateHz, rateSource: 'option' };
  const stated = metadata.get(RATE_KEY);
  if (stated !== undefined) {
    return { rateHz: parseRateMetadata(stated, { file, line: metadataLines.get(RATE_KEY)! }), rateSource: 'metadata' };
  }
  const span = peek.lastTime - peek.firstTime;
  if (plan.t !== -1 && peek.rows >= 2 && Number.isFinite(span) && span > 0) {
    return { rateHz: (peek.rows - 1) / span, rateSource: 't-column' };
  }
  throw new CaptureFormatError({
    file,
    line: headerLine,
    expected:
      plan.t === -1
        ? `a sample rate: a "t" column, a "# ${RATE_KEY}: <Hz>" line or the rateHz option`
        : `a sample rate: increasing times in the first rows of column "${plan.names[plan.t]}", a "# ${RATE_KEY}: <Hz>" line or the rateHz option`,
  });
}
