// Capture writers (CSV text, WAV PCM/float) in constant memory: a fixed encode buffer, WAV sizes patched at close.
// WAV layout per the Microsoft/IBM RIFF/WAVE specification (1991): RIFF header, "fmt ", "fact" (float only), LIST/INFO, "data".
import { ADC_KEY, RATE_KEY } from './metadata.js';
import { integerInRange, OptionError, positiveFinite } from '../../core/options.js';
import { openFileSink, type OutputSink } from './output-file.js';
import { writeAscii, writeIntegerAscii } from './text-encode.js';
import type { CaptureFormat, SampleEncoding } from './types.js';
import { WAVE_FORMAT_IEEE_FLOAT, WAVE_FORMAT_PCM } from './wav-header.js';

export interface CaptureWriterOptions {
  /** `csv` or `wav`; required. */
  format: CaptureFormat;
  /** Sample rate in Hz, positive finite; CSV writes it as `# rate_hz:`, WAV into the header (rounded to an integer there). */
  rateHz: number;
  /**
   * CSV: `decimal-text` (default; shortest text that reads back to the same double) or `integer-text` (integers only).
   * WAV: `int16` (default), `int24` (integers in range only) or `float32` (values rounded to float32).
   */
  encoding?: SampleEncoding;
  /**
   * CSV column names of the channels (x, y, then any further detector outputs); default `["x", "y"]`, or `ch1`…`chN`
   * for `channelCount` N > 2. Not for WAV, whose channels are numbered.
   */
  channelNames?: readonly string[];
  /** Channels per sample, 2..4 (a pair, or three or four detector outputs); default the names' count, else 2. */
  channelCount?: number;
  /** CSV only: write a first column `t` = index / rateHz in seconds; default false. */
  timeColumn?: boolean;
  /** `key: value` pairs: `# key: value` lines in CSV, the LIST/INFO comment in WAV. Keys `[A-Za-z][A-Za-z0-9_.-]*`. */
  metadata?: Readonly<Record<string, string>>;
}

export interface CaptureWriter {
  readonly path: string;
  readonly samplesWritten: number;
  /** Appends `length` samples of x and y (a writer of two channels). After any error, only `abort()` is accepted. */
  write(x: ArrayLike<number>, y: ArrayLike<number>, length: number): Promise<void>;
  /** Appends `length` samples of every channel (`channels[k][i]`, `channelCount` arrays). */
  writeChannels(channels: readonly ArrayLike<number>[], length: number): Promise<void>;
  /** Flushes, patches the WAV sizes and renames the temporary file to `path`. */
  close(): Promise<void>;
  /** Removes the temporary file; `path` is never created. Safe after a failed write or close. */
  abort(): Promise<void>;
}

const ENCODE_BUFFER_BYTES = 65_536;
/** Room kept free for one encoded CSV row: five shortest-round-trip doubles (at most 24 chars each) and separators. */
const MAX_CSV_ROW_BYTES = 160;
const MAX_WAV_DATA_BYTES = 0xffffffff - 1024;
const METADATA_KEY = /^[A-Za-z][A-Za-z0-9_.-]*$/;

export async function createCaptureWriter(path: string, options: CaptureWriterOptions): Promise<CaptureWriter> {
  const resolved = resolveWriterOptions(options);
  const sink = await openFileSink(path);
  return resolved.format === 'csv' ? createCsvWriter(path, sink, resolved) : createWavWriter(path, sink, resolved);
}

interface ResolvedWriterOptions {
  readonly format: CaptureFormat;
  readonly rateHz: number;
  readonly encoding: SampleEncoding;
  readonly channelNames: readonly string[];
  readonly timeColumn: boolean;
  readonly metadata: readonly (readonly [string, string])[];
}

function resolveWriterOptions(options: CaptureWriterOptions): ResolvedWriterOptions {
  const format = options.format;
  if (format !== 'csv' && format !== 'wav') throw new OptionError('format', '"csv" or "wav"', format);
  const rateHz = positiveFinite('rateHz', options.rateHz);
  const allowed: readonly SampleEncoding[] = format === 'csv' ? ['decimal-text', 'integer-text'] : ['int16', 'int24', 'float32'];
  const encoding = options.encoding ?? allowed[0]!;
  if (!allowed.includes(encoding)) {
    throw new OptionError('encoding', `one of ${allowed.join(', ')} for ${format}`, encoding);
  }
  if (format === 'wav' && options.channelNames !== undefined) {
    throw new OptionError('channelNames', 'left out for WAV, whose channels are numbered (ch1 is x, ch2 is y)', options.channelNames);
  }
  if (format === 'wav' && options.timeColumn === true) {
    throw new OptionError('timeColumn', 'left out for WAV, whose times follow from the header sample rate', options.timeColumn);
  }
  if (format === 'wav' && !Number.isInteger(rateHz)) {
    throw new OptionError('rateHz', 'an integer for WAV, whose header stores whole hertz', rateHz);
  }
  const channelCount = integerInRange('channelCount', options.channelCount ?? options.channelNames?.length ?? 2, 2, 4);
  const channelNames = options.channelNames ?? (channelCount === 2 ? ['x', 'y'] : Array.from({ length: channelCount }, (_, k) => `ch${k + 1}`));
  if (channelNames.length !== channelCount) throw new OptionError('channelNames', `${channelCount} names, one per channel`, channelNames);
  for (const name of channelNames) {
    if (!/^[^,"\r\n#]+$/.test(name) || name.trim() !== name || name === 't') {
      throw new OptionError('channelNames', 'non-empty names without commas, quotes, "#", line breaks, outer spaces or the name "t"', name);
    }
  }
  if (new Set(channelNames).size !== channelNames.length) throw new OptionError('channelNames', 'different names', channelNames);
  const metadata = Object.entries(options.metadata ?? {});
  for (const [key, value] of metadata) {
    if (!METADATA_KEY.test(key)) throw new OptionError('metadata keys', `names matching ${METADATA_KEY.source}`, key);
    if (key === RATE_KEY) throw new OptionError('metadata keys', `other than "${RATE_KEY}" (give rateHz instead)`, key);
    if (format === 'wav' && key === ADC_KEY) throw new OptionError('metadata keys', `other than "${ADC_KEY}" for WAV (the header states the sample format)`, key);
    if (/[\r\n\0]/.test(value)) throw new OptionError(`metadata.${key}`, 'one line', value);
  }
  return { format, rateHz, encoding, channelNames, timeColumn: options.timeColumn ?? false, metadata };
}

function checkChannels(channels: readonly ArrayLike<number>[], length: number, options: ResolvedWriterOptions): void {
  if (channels.length !== options.channelNames.length) {
    throw new RangeError(`the writer takes ${options.channelNames.length} channels (${options.channelNames.join(', ')}); got ${channels.length}`);
  }
  const shortest = Math.min(...channels.map((channel) => channel.length));
  if (!Number.isInteger(length) || length < 0 || length > shortest) {
    throw new RangeError(`length must be an integer in 0..${shortest} (the shortest channel) (got ${length})`);
  }
}

/** Shared life cycle: buffer, state and abort; `encode` turns one write into bytes. */
function createLifecycle(path: string, sink: OutputSink) {
  const buffer = Buffer.allocUnsafe(ENCODE_BUFFER_BYTES);
  const state = { used: 0, failed: false, finished: false, samplesWritten: 0 };
  return {
    buffer,
    state,
    async flush(): Promise<void> {
      if (state.used > 0) await sink.write(buffer, state.used);
      state.used = 0;
    },
    checkUsable(): void {
      if (state.finished) throw new Error(`${path}: the capture writer is closed`);
      if (state.failed) throw new Error(`${path}: an earlier write failed; call abort()`);
    },
    async abort(): Promise<void> {
      state.finished = true;
      await sink.discard();
    },
  };
}

function createCsvWriter(path: string, sink: OutputSink, options: ResolvedWriterOptions): CaptureWriter {
  const life = createLifecycle(path, sink);
  const { buffer, state } = life;
  const integerText = options.encoding === 'integer-text';
  const COMMA = 0x2c;
  const LF = 0x0a;
  let headerWritten = false;

  function preamble(): string {
    const lines = [`# ${RATE_KEY}: ${options.rateHz}`, ...options.metadata.map(([key, value]) => `# ${key}: ${value}`)];
    lines.push((options.timeColumn ? ['t', ...options.channelNames] : options.channelNames).join(','));
    return lines.join('\n') + '\n';
  }

  function writeValue(at: number, value: number, channel: number, index: number): number {
    if (!integerText) return writeAscii(buffer, at, String(value));
    if (!Number.isSafeInteger(value)) {
      throw new RangeError(`${path}: sample ${index} of ${options.channelNames[channel]} is ${value}; integer-text takes safe integers only`);
    }
    return writeIntegerAscii(buffer, at, value);
  }

  async function writeChannels(channels: readonly ArrayLike<number>[], length: number): Promise<void> {
    life.checkUsable();
    checkChannels(channels, length, options);
    const count = channels.length;
    try {
      if (!headerWritten) {
        const text = Buffer.from(preamble(), 'utf8');
        await sink.write(text, text.length);
        headerWritten = true;
      }
      for (let i = 0; i < length; i++) {
        if (state.used > ENCODE_BUFFER_BYTES - MAX_CSV_ROW_BYTES) await life.flush();
        const index = state.samplesWritten + i;
        let at = state.used;
        if (options.timeColumn) {
          at = writeAscii(buffer, at, String(index / options.rateHz));
          buffer[at++] = COMMA;
        }
        for (let c = 0; c < count; c++) {
          if (c > 0) buffer[at++] = COMMA;
          at = writeValue(at, channels[c]![i]!, c, index);
        }
        buffer[at++] = LF;
        state.used = at;
      }
      state.samplesWritten += length;
    } catch (error) {
      state.failed = true;
      throw error;
    }
  }

  return {
    path,
    get samplesWritten() {
      return state.samplesWritten;
    },
    write: (x, y, length) => writeChannels([x, y], length),
    writeChannels,
    async close() {
      life.checkUsable();
      try {
        if (!headerWritten) {
          const text = Buffer.from(preamble(), 'utf8');
          await sink.write(text, text.length);
        }
        await life.flush();
        state.finished = true;
        await sink.commit();
      } catch (error) {
        state.failed = true;
        state.finished = false;
        throw error;
      }
    },
    abort: () => life.abort(),
  };
}

function createWavWriter(path: string, sink: OutputSink, options: ResolvedWriterOptions): CaptureWriter {
  const life = createLifecycle(path, sink);
  const { buffer, state } = life;
  const encoding = options.encoding;
  const bytesPerSample = encoding === 'int16' ? 2 : encoding === 'int24' ? 3 : 4;
  const count = options.channelNames.length;
  const blockAlign = count * bytesPerSample;
  const header = wavHeader(options, bytesPerSample);
  const framesPerFlush = Math.floor(ENCODE_BUFFER_BYTES / blockAlign);
  const limit = encoding === 'int16' ? 32767 : 8388607;
  let headerWritten = false;

  function checkInteger(value: number, channel: number, index: number): void {
    if (!Number.isInteger(value) || value < -limit - 1 || value > limit) {
      throw new RangeError(`${path}: sample ${index} of ${channel === 0 ? 'x' : channel === 1 ? 'y' : `channel ${channel + 1}`} is ${value}; ${encoding} WAV takes integers in ${-limit - 1}..${limit}`);
    }
  }

  async function writeChannels(channels: readonly ArrayLike<number>[], length: number): Promise<void> {
    life.checkUsable();
    checkChannels(channels, length, options);
    try {
      if ((state.samplesWritten + length) * blockAlign > MAX_WAV_DATA_BYTES - header.bytes.length) {
        throw new RangeError(`${path}: a WAV file holds at most 4 GiB; ${state.samplesWritten + length} frames of ${blockAlign} bytes exceed it`);
      }
      if (!headerWritten) {
        await sink.write(header.bytes, header.bytes.length);
        headerWritten = true;
      }
      for (let i = 0; i < length; i++) {
        if (state.used + blockAlign > framesPerFlush * blockAlign) await life.flush();
        let at = state.used;
        for (let c = 0; c < count; c++) {
          const value = channels[c]![i]!;
          if (encoding === 'float32') buffer.writeFloatLE(value, at);
          else {
            checkInteger(value, c, state.samplesWritten + i);
            if (encoding === 'int16') buffer.writeInt16LE(value, at);
            else buffer.writeIntLE(value, at, 3);
          }
          at += bytesPerSample;
        }
        state.used = at;
      }
      state.samplesWritten += length;
    } catch (error) {
      state.failed = true;
      throw error;
    }
  }

  return {
    path,
    get samplesWritten() {
      return state.samplesWritten;
    },
    write: (x, y, length) => writeChannels([x, y], length),
    writeChannels,
    async close() {
      life.checkUsable();
      try {
        if (!headerWritten) await sink.write(header.bytes, header.bytes.length);
        await life.flush();
        const dataBytes = state.samplesWritten * blockAlign;
        const patch = Buffer.alloc(4);
        patch.writeUInt32LE(header.bytes.length - 8 + dataBytes, 0);
        await sink.writeAt(patch, 4, 4);
        patch.writeUInt32LE(dataBytes, 0);
        await sink.writeAt(patch, 4, header.dataSizeOffset);
        if (header.factOffset !== -1) {
          patch.writeUInt32LE(state.samplesWritten, 0);
          await sink.writeAt(patch, 4, header.factOffset);
        }
        state.finished = true;
        await sink.commit();
      } catch (error) {
        state.failed = true;
        state.finished = false;
        throw error;
      }
    },
    abort: () => life.abort(),
  };
}

interface WavHeader {
  readonly bytes: Buffer;
  readonly dataSizeOffset: number;
  /** Offset of the fact chunk's sample count, -1 for PCM (which has no fact chunk). */
  readonly factOffset: number;
}

/** The header up to and including the data chunk header, with sizes 0 until `close` patches them. */
function wavHeader(options: ResolvedWriterOptions, bytesPerSample: number): WavHeader {
  const float = options.encoding === 'float32';
  const channels = options.channelNames.length;
  const fmtBytes = float ? 18 : 16;
  const comment = options.metadata.map(([key, value]) => `${key}: ${value}`).join('\n');
  const commentBytes = comment === '' ? null : Buffer.from(comment + '\0', 'utf8');
  const listBytes = commentBytes === null ? 0 : 8 + 4 + 8 + commentBytes.length + (commentBytes.length & 1);
  const factBytes = float ? 12 : 0;
  const total = 12 + 8 + fmtBytes + factBytes + listBytes + 8;
  const bytes = Buffer.alloc(total);
  let at = bytes.write('RIFF', 0, 'latin1');
  at = bytes.writeUInt32LE(0, at);
  at += bytes.write('WAVE', at, 'latin1');
  at += bytes.write('fmt ', at, 'latin1');
  at = bytes.writeUInt32LE(fmtBytes, at);
  at = bytes.writeUInt16LE(float ? WAVE_FORMAT_IEEE_FLOAT : WAVE_FORMAT_PCM, at);
  at = bytes.writeUInt16LE(channels, at);
  at = bytes.writeUInt32LE(options.rateHz, at);
  at = bytes.writeUInt32LE(options.rateHz * channels * bytesPerSample, at);
  at = bytes.writeUInt16LE(channels * bytesPerSample, at);
  at = bytes.writeUInt16LE(bytesPerSample * 8, at);
  if (float) at = bytes.writeUInt16LE(0, at);
  let factOffset = -1;
  if (float) {
    at += bytes.write('fact', at, 'latin1');
    at = bytes.writeUInt32LE(4, at);
    factOffset = at;
    at = bytes.writeUInt32LE(0, at);
  }
  if (commentBytes !== null) {
    at += bytes.write('LIST', at, 'latin1');
    at = bytes.writeUInt32LE(listBytes - 8, at);
    at += bytes.write('INFO', at, 'latin1');
    at += bytes.write('ICMT', at, 'latin1');
    at = bytes.writeUInt32LE(commentBytes.length, at);
    at += commentBytes.copy(bytes, at);
    at += commentBytes.length & 1;
  }
  at += bytes.write('data', at, 'latin1');
  const dataSizeOffset = at;
  bytes.writeUInt32LE(0, at);
  return { bytes, dataSizeOffset, factOffset };
}
