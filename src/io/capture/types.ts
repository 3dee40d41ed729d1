// Shapes shared by the capture readers and writers: options, file description and the sample block.
import type { AdcFormat } from '../../core/index.js';

/** How the samples are stored in the file. */
export type SampleEncoding = 'int16' | 'int24' | 'float32' | 'integer-text' | 'decimal-text';

export type CaptureFormat = 'csv' | 'wav';

/** A channel picked by name (`"x"`, `"ch2"`) or by 1-based position (column 1 is the first CSV column, channel 1 the first WAV channel). */
export type ChannelSelector = string | number;

/** Where `rateHz` came from. */
export type RateSource = 'option' | 'header' | 'metadata' | 't-column';

export interface CaptureInfo {
  /** The path as given to `openCapture`. */
  readonly file: string;
  readonly format: CaptureFormat;
  /** Sample rate in Hz. With a CSV `t` column and no other source it is estimated from the first rows. */
  readonly rateHz: number;
  readonly rateSource: RateSource;
  /** Names of every column (CSV header) or channel (`ch1`, `ch2`, ... for WAV), in file order. */
  readonly channelNames: readonly string[];
  /** The names of the channels delivered as `x` and `y`, and of the time column (null when none is used). */
  readonly xChannel: string;
  readonly yChannel: string;
  /** The names of every channel delivered, in `CaptureBlock.channels` order: x, y, then any further outputs. */
  readonly channels: readonly string[];
  readonly timeColumn: string | null;
  readonly sampleEncoding: SampleEncoding;
  /** Sample frames in the file when the header states it (WAV); null for CSV, which is not counted ahead. */
  readonly totalSamples: number | null;
  /** Key/value pairs from `# key: value` lines (CSV) or the LIST/INFO comment (WAV), in file order. */
  readonly metadata: ReadonlyMap<string, string>;
  /**
   * The converter's format from the WAV header or the `adc` metadata key, as the pipeline's saturation check takes
   * it (the core's type, see `integerAdc` for integer widths); null when the file does not say.
   */
  readonly adc: AdcFormat | null;
  /** Things the file does not agree with itself about that do not stop reading it (e.g. WAV chunk sizes), in words. */
  readonly warnings: readonly string[];
}

/** The arrays a block's samples come in: Float64Array, or Int16Array as stored (see `OpenCaptureOptions.int16Blocks`). */
export type BlockSamples = Float64Array | Int16Array;

/**
 * One block of samples. The reader reuses the same block object and arrays for every block: copy what you keep
 * before asking for the next one. `x.length === y.length === length` always (the last, shorter block is a view).
 */
export interface CaptureBlock<Samples extends BlockSamples = Float64Array> {
  /** Channel values: ADC counts for integer encodings, stored values for float and text. */
  readonly x: Samples;
  readonly y: Samples;
  /** Every channel delivered (see `OpenCaptureOptions.channels`): `channels[0]` is `x`, `channels[1]` is `y`. */
  readonly channels: readonly Samples[];
  /** Times in seconds from the CSV `t` column, or null when the file has none (then t = index / rateHz). */
  readonly t: Float64Array | null;
  readonly length: number;
  /** Absolute index of the block's first sample: 0 for the first sample of the file. */
  readonly firstIndex: number;
}

export interface OpenCaptureOptions {
  /** File format; default sniffed from the content (RIFF/WAVE magic, else text), then the extension. */
  format?: CaptureFormat;
  /** Channel delivered as x; default `"x"` for CSV, channel 1 for WAV. Numbers are 1-based. */
  xChannel?: ChannelSelector;
  /** Channel delivered as y; default `"y"` for CSV, channel 2 for WAV. Numbers are 1-based. */
  yChannel?: ChannelSelector;
  /**
   * 2 to 4 detector outputs of one axis, in order (three- and four-output detectors): the first two are delivered
   * as x and y, all of them in `CaptureBlock.channels`. Not together with xChannel/yChannel. Default [x, y].
   */
  channels?: readonly ChannelSelector[];
  /** CSV time column in seconds; default `"t"` when the header has one; null ignores any time column. */
  timeColumn?: ChannelSelector | null;
  /** Sample rate in Hz, positive finite; overrides the header, metadata and `t` estimate. Required for CSV without any of them. */
  rateHz?: number;
  /** Largest number of samples per block, integer in 1..1048576; default 4096. */
  blockSize?: number;
  /** Bytes read from the file per read call, integer in 1..67108864; default 262144. Does not change the samples delivered. */
  readChunkBytes?: number;
  /**
   * WAV only: the first sample frame delivered (0-based; its block's `firstIndex`), integer from 0; default 0. A
   * start at or beyond the end delivers nothing. CSV captures refuse it (they are read from the start).
   */
  startSample?: number;
  /** WAV only: the most sample frames delivered from `startSample`, integer from 0; default all to the end. */
  sampleCount?: number;
}

/**
 * `openCapture`'s options for blocks of x and y as Int16Array, the samples as stored, where the file stores int16
 * samples and two channels are delivered (an int16 WAV capture): no widening to Float64Array, for a chain that takes
 * int16 blocks as they are. Other captures deliver Float64Array as without it.
 */
export interface Int16BlockOptions extends OpenCaptureOptions {
  readonly int16Blocks: true;
}

/** An open capture: its description and a single pass over its samples. */
export interface Capture<Samples extends BlockSamples = Float64Array> extends AsyncIterable<CaptureBlock<Samples>> {
  readonly info: CaptureInfo;
  /**
   * The blocks in file order. Callable once. A CaptureFormatError rejects the iteration at the bad place, after every
   * good block before it. Ending the loop early (break/return) or reaching the end closes the file.
   */
  blocks(): AsyncIterableIterator<CaptureBlock<Samples>>;
  /** Releases the file; safe to call more than once, and after the iteration has ended. */
  close(): Promise<void>;
}
