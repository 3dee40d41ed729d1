// Text line mode for first bring-up: one sample per line, `x0,y0[,x1,y1…]` as decimal int16 integers,
// lines ended by LF (CR before it is ignored). A byte-level state machine: no strings, no allocation per line.

import { integerInRange, OptionError } from '../../core/options.js';
import { NO_EDGES, NO_LAYOUT, type SampleBlock } from './block.js';
import { WIRE_MAX_CHANNELS, WIRE_MAX_SAMPLES_PER_FRAME, WIRE_SEQUENCE_MODULUS } from './format.js';

/** Why a line was rejected. */
export type MalformedLineReason = 'bad character' | 'empty field' | 'too many fields' | 'too few fields' | 'out of range';

export interface LineDecoderOptions {
  /** Integers expected per line; even, 2..16 (two per axis). Default 2. */
  readonly channelCount?: number;
  /** Samples per block before a block is handed out; 1..4096. Default 256. A push also ends its block. */
  readonly maxSamplesPerBlock?: number;
  /** Called with a reused block (valid only during the call) when it is full and at the end of each push. */
  readonly onBlock: (block: SampleBlock) => void;
  /** Called for each rejected line with its 1-based line number; optional because the counters keep the totals. */
  readonly onMalformed?: (lineNumber: number, reason: MalformedLineReason) => void;
}

export interface LineDecoderConfig {
  readonly channelCount: number;
  readonly maxSamplesPerBlock: number;
}

export interface LineDecoderCounters {
  /** Lines ended so far (the current line number minus one). */
  lines: number;
  linesGood: number;
  linesMalformed: number;
  /** Empty or whitespace-only lines, skipped. */
  blankLines: number;
  /** Line number of the latest malformed line, 0 when none. */
  lastMalformedLine: number;
}

export interface LineDecoder {
  readonly config: LineDecoderConfig;
  readonly counters: Readonly<LineDecoderCounters>;
  /** Feeds one chunk; returns the samples handed out during this call. */
  push(chunk: Uint8Array): number;
  /** Ends the stream: an unterminated last line is parsed as if LF followed. Returns samples handed out. */
  end(): number;
  reset(): void;
}

const LF = 0x0a;
const CR = 0x0d;
const SPACE = 0x20;
const TAB = 0x09;
const COMMA = 0x2c;
const MINUS = 0x2d;
const PLUS = 0x2b;
const DIGIT_0 = 0x30;
const DIGIT_9 = 0x39;

/** Field parse states. */
const BEFORE_NUMBER = 0;
const AFTER_SIGN = 1;
const IN_DIGITS = 2;
const AFTER_NUMBER = 3;

export function createLineDecoder(options: LineDecoderOptions): LineDecoder {
  const channelCount = integerInRange('channelCount', options.channelCount ?? 2, 2, WIRE_MAX_CHANNELS);
  if (channelCount % 2 !== 0) throw new OptionError('channelCount', 'even', channelCount);
  const maxSamplesPerBlock = integerInRange(
    'maxSamplesPerBlock',
    options.maxSamplesPerBlock ?? 256,
    1,
    WIRE_MAX_SAMPLES_PER_FRAME,
  );
  if (typeof options.onBlock !== 'function') throw new OptionError('onBlock', 'a function', options.onBlock);
  const { onBlock, onMalformed } = options;
  const config: LineDecoderConfig = Object.freeze({ channelCount, maxSamplesPerBlock });

  const sampleStore = new Int16Array(channelCount * maxSamplesPerBlock);
  // Fields of the line being read; copied into the block only once the line proves good, so a block
  // handed out between chunks never sees a half-read line.
  const lineValues = new Int16Array(channelCount);
  const counters: LineDecoderCounters = { lines: 0, linesGood: 0, linesMalformed: 0, blankLines: 0, lastMalformedLine: 0 };
  const block = {
    samples: sampleStore.subarray(0, 0),
    channelCount,
    channelLayout: NO_LAYOUT,
    samplesPerFrame: 0,
    sequence: 0,
    sampleIndex: 0,
    sampleRateHz: Number.NaN,
    timestampUs: Number.NaN,
    sampleCounter: Number.NaN,
    ...NO_EDGES,
  };

  let rows = 0;
  let blockSequence = 0;
  let nextSampleIndex = 0;
  // State of the line being read.
  let fieldIndex = 0;
  let fieldState = BEFORE_NUMBER;
  let magnitude = 0;
  let negative = false;
  let lineHasContent = false;
  let lineError: MalformedLineReason | null = null;

  function startLine(): void {
    fieldIndex = 0;
    fieldState = BEFORE_NUMBER;
    magnitude = 0;
    negative = false;
    lineHasContent = false;
    lineError = null;
  }

  /** Stores the field just read; returns false (and sets lineError) when it is not a valid int16. */
  function storeField(): boolean {
    if (fieldState === BEFORE_NUMBER || fieldState === AFTER_SIGN) {
      lineError = 'empty field';
      return false;
    }
    const value = negative ? -magnitude : magnitude;
    if (value < -32768 || value > 32767) {
      lineError = 'out of range';
      return false;
    }
    lineValues[fieldIndex] = value;
    return true;
  }

  function emitBlock(): number {
    const count = rows;
    if (count === 0) return 0;
    if (block.samples.length !== count * channelCount) block.samples = sampleStore.subarray(0, count * channelCount);
    block.samplesPerFrame = count;
    block.sequence = blockSequence;
    block.sampleIndex = nextSampleIndex;
    blockSequence = (blockSequence + 1) % WIRE_SEQUENCE_MODULUS;
    nextSampleIndex += count;
    rows = 0;
    onBlock(block);
    return count;
  }

  /** Completes the current line; returns samples handed out (a full block may be emitted). */
  function endLine(): number {
    counters.lines++;
    const lineNumber = counters.lines;
    if (lineError === null && !lineHasContent) {
      counters.blankLines++;
      startLine();
      return 0;
    }
    if (lineError === null && storeField() && fieldIndex !== channelCount - 1) lineError = 'too few fields';
    let emitted = 0;
    if (lineError === null) {
      counters.linesGood++;
      sampleStore.set(lineValues, rows * channelCount);
      rows++;
      if (rows === maxSamplesPerBlock) emitted = emitBlock();
    } else {
      counters.linesMalformed++;
      counters.lastMalformedLine = lineNumber;
      onMalformed?.(lineNumber, lineError);
    }
    startLine();
    return emitted;
  }

  function consume(byte: number): number {
    if (byte === LF) return endLine();
    if (lineError !== null) return 0;
    if (byte === SPACE || byte === TAB || byte === CR) {
      if (fieldState === AFTER_SIGN) lineError = 'bad character';
      else if (fieldState === IN_DIGITS) fieldState = AFTER_NUMBER;
      return 0;
    }
    lineHasContent = true;
    if (byte >= DIGIT_0 && byte <= DIGIT_9) {
      if (fieldState === AFTER_NUMBER) {
        lineError = 'bad character';
        return 0;
      }
      fieldState = IN_DIGITS;
      magnitude = magnitude * 10 + (byte - DIGIT_0);
      // Stop growing once beyond int16: keeps the number exact and the verdict the same.
      if (magnitude > 32768) lineError = 'out of range';
      return 0;
    }
    if (byte === MINUS || byte === PLUS) {
      if (fieldState !== BEFORE_NUMBER) lineError = 'bad character';
      else {
        fieldState = AFTER_SIGN;
        negative = byte === MINUS;
      }
      return 0;
    }
    if (byte === COMMA) {
      if (!storeField()) return 0;
      if (fieldIndex === channelCount - 1) {
        lineError = 'too many fields';
        return 0;
      }
      fieldIndex++;
      fieldState = BEFORE_NUMBER;
      magnitude = 0;
      negative = false;
      return 0;
    }
    lineError = 'bad character';
    return 0;
  }

  function push(chunk: Uint8Array): number {
    let emitted = 0;
    for (let i = 0; i < chunk.length; i++) emitted += consume(chunk[i]!);
    return emitted + emitBlock();
  }

  function end(): number {
    let emitted = 0;
    if (lineHasContent || lineError !== null) emitted += endLine();
    return emitted + emitBlock();
  }

  function reset(): void {
    rows = 0;
    blockSequence = 0;
    nextSampleIndex = 0;
    startLine();
    counters.lines = 0;
    counters.linesGood = 0;
    counters.linesMalformed = 0;
    counters.blankLines = 0;
    counters.lastMalformedLine = 0;
  }

  reset();
  return { config, counters, push, end, reset };
}

/**
 * Formats `count` interleaved samples as text lines (`x0,y0,…\n`), for emulators and tests.
 */
export function formatSampleLines(samples: ArrayLike<number>, channelCount: number, count: number): string {
  const lines: string[] = [];
  for (let s = 0; s < count; s++) {
    const fields: number[] = [];
    for (let c = 0; c < channelCount; c++) fields.push(samples[s * channelCount + c]!);
    lines.push(fields.join(','));
  }
  return lines.length === 0 ? '' : `${lines.join('\n')}\n`;
}
