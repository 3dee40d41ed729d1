// Streaming WAV capture reader: sample frames decoded chunk by chunk into x/y blocks; integer samples stay ADC counts.
import type { FileHandle } from 'node:fs/promises';
import { endianness } from 'node:os';
import { CaptureFormatError } from './errors.js';
import { integerAdc } from './metadata.js';
import type { ResolvedCaptureOptions } from './resolved-options.js';
import { singlePassCapture } from './single-pass.js';
import { OptionError } from '../../core/options.js';
import type { AdcFormat } from '../../core/index.js';
import type { BlockSamples, Capture, CaptureInfo, ChannelSelector } from './types.js';
import { readWavLayout, type WavLayout } from './wav-header.js';
import { createInt16Widener } from '../../accel/int16-widen.js';

/**
 * A part of a file whose handle and header are shared by several parts (openCaptureParts): its layout as read
 * once, and what ending the part does in place of closing the handle. Such a part starts its first read at once,
 * so that the read overlaps the part before it.
 */
export interface SharedWavHandle {
  readonly layout: WavLayout;
  readonly release: () => Promise<void>;
}

export async function openWavCapture(file: string, handle: FileHandle, options: ResolvedCaptureOptions, shared?: SharedWavHandle): Promise<Capture<BlockSamples>> {
  const layout = shared?.layout ?? (await readWavLayout(file, handle));
  if (options.timeColumn !== undefined && options.timeColumn !== null) {
    throw new OptionError('timeColumn', `left out: ${file} is WAV, its times follow from the header's sample rate`, options.timeColumn);
  }
  const channelNames = Array.from({ length: layout.channels }, (_, index) => `ch${index + 1}`);
  const xChannel = pickChannel(file, layout, channelNames, 'xChannel', options.xChannel ?? 1);
  const yChannel = pickChannel(file, layout, channelNames, 'yChannel', options.yChannel ?? 2);
  const extraChannels = options.extraChannels.map((selector, index) => pickChannel(file, layout, channelNames, `channels[${index + 2}]`, selector));
  const info: CaptureInfo = Object.freeze({
    file,
    format: 'wav',
    rateHz: options.rateHz ?? layout.rateHz,
    rateSource: options.rateHz === null ? 'header' : 'option',
    channelNames: Object.freeze(channelNames),
    xChannel: channelNames[xChannel]!,
    yChannel: channelNames[yChannel]!,
    channels: Object.freeze([xChannel, yChannel, ...extraChannels].map((channel) => channelNames[channel]!)),
    timeColumn: null,
    sampleEncoding: layout.encoding,
    totalSamples: Math.floor(layout.dataBytes / layout.blockAlign),
    metadata: layout.metadata,
    adc: adcOf(layout),
    warnings: Object.freeze(
      layout.ignoredBytes > 0
        ? [
            `${file}: the data chunk at byte ${layout.dataChunkOffset} declares ${layout.dataBytes} bytes, but ${layout.ignoredBytes} bytes after the chunks ` +
              `(${layout.riffBytes === layout.fileBytes ? 'the RIFF size agrees with the file' : `the RIFF header declares ${layout.riffBytes} bytes in a file of ${layout.fileBytes}`}) belong to no chunk: they are ignored`,
          ]
        : [],
    ),
  });

  const { blockAlign, dataOffset } = layout;
  // The frames asked for (startSample, sampleCount), within the data chunk.
  const firstFrame = Math.min(options.startSample, info.totalSamples!);
  const lastFrame = options.sampleCount === null ? info.totalSamples! : Math.min(info.totalSamples!, firstFrame + options.sampleCount);
  const dataEnd = options.sampleCount === null ? dataOffset + layout.dataBytes : dataOffset + lastFrame * blockAlign;
  const bytesPerSample = blockAlign / layout.channels;
  const xByte = xChannel * bytesPerSample;
  const yByte = yChannel * bytesPerSample;
  const blockSize = options.blockSize;
  const littleEndian = endianness() === 'LE';
  // Two frame buffers, each with room for a chunk after a partial frame carried over: the next chunk is read into
  // one (on libuv's thread pool) while the other is decoded, right after the bytes of the partial frame that decoding
  // will leave (known when the read starts), so no chunk is copied. Frames start at a buffer's first byte, aligned
  // for the Int16Array/Float32Array views on little-endian machines.
  const bufferBytes = Math.ceil((options.readChunkBytes + blockAlign) / 16) * 16;
  // Adjacent int16 x and y: the frame buffers and the blocks in the memory of a WebAssembly SIMD kernel that
  // decodes the one into the other in a pass (null without WebAssembly SIMD: the views and loops below).
  const widener = littleEndian && layout.encoding === 'int16' && yChannel === xChannel + 1 ? createInt16Widener(2 * bufferBytes + 16 * blockSize) : null;
  const storage = widener?.memory ?? new ArrayBuffer(2 * bufferBytes);
  const frameBuffers = [0, bufferBytes].map((at) => ({
    at,
    bytes: Buffer.from(storage, at, bufferBytes),
    int16: littleEndian && layout.encoding === 'int16' ? new Int16Array(storage, at, bufferBytes >> 1) : null,
    float32: littleEndian && layout.encoding === 'float32' ? new Float32Array(storage, at, bufferBytes >> 2) : null,
  }));
  let current = 0;
  let bufferStart = 0;
  let bufferEnd = 0;
  let filePosition = dataOffset + firstFrame * blockAlign;
  let reachedEnd = false;

  // int16Blocks: x and y as stored, for two int16 channels (else Float64Array as without it).
  const asStored = options.int16Blocks && layout.encoding === 'int16' && extraChannels.length === 0;
  const Samples = asStored ? Int16Array : Float64Array;
  const xBuffer: BlockSamples = widener === null ? new Samples(blockSize) : new Samples(storage, 2 * bufferBytes, blockSize);
  const yBuffer: BlockSamples = widener === null ? new Samples(blockSize) : new Samples(storage, 2 * bufferBytes + 8 * blockSize, blockSize);
  const extraBuffers = extraChannels.map(() => new Float64Array(blockSize));
  let pendingError: Error | null = null;
  let ahead: Promise<number> | null = null;

  /** Starts reading the next chunk into the frame buffer not being decoded, after `carried` bytes. */
  function readAhead(carried: number): void {
    const wanted = Math.min(options.readChunkBytes, dataEnd - filePosition);
    ahead = wanted === 0 ? Promise.resolve(0) : handle.read(frameBuffers[1 - current]!.bytes, carried, wanted, filePosition).then((result) => result.bytesRead);
    // Awaited (and so thrown) by the next refill; this only keeps a pass that ends early from leaving it unhandled.
    ahead.catch(() => undefined);
  }

  /** Takes the chunk read ahead, after the partial frame left here; false when the data chunk is used up. */
  async function refill(): Promise<boolean> {
    if (reachedEnd) return false;
    const carried = bufferEnd - bufferStart;
    if (ahead === null) readAhead(carried);
    const bytesRead = await ahead!;
    ahead = null;
    const left = frameBuffers[current]!.bytes;
    current = 1 - current;
    left.copy(frameBuffers[current]!.bytes, 0, bufferStart, bufferEnd);
    bufferStart = 0;
    bufferEnd = carried + bytesRead;
    filePosition += bytesRead;
    if (bytesRead === 0) {
      reachedEnd = true;
      if (filePosition < dataEnd) {
        throw new CaptureFormatError({
          file,
          byteOffset: filePosition,
          expected: `${dataEnd - filePosition} more bytes of sample data before the end of the file (the data chunk at byte ${layout.dataChunkOffset} declares ${layout.dataBytes} bytes)`,
        });
      }
      if (carried > 0) {
        throw new CaptureFormatError({
          file,
          byteOffset: filePosition - carried,
          expected: `whole sample frames of ${blockAlign} bytes (the data chunk ends ${carried} bytes into a frame)`,
        });
      }
      return false;
    }
    readAhead(bufferEnd % blockAlign);
    return true;
  }

  function decode(count: number, frames: number): void {
    const { at: bufferAt, bytes: buffer, int16: int16View, float32: float32View } = frameBuffers[current]!;
    // Outputs 3 and 4 of three- and four-output detectors: a plain per-sample read, off the two-channel fast paths.
    extraBuffers.forEach((target, index) => {
      const offset = extraChannels[index]! * bytesPerSample;
      for (let i = count, at = bufferStart + offset; i < count + frames; i++, at += blockAlign) {
        target[i] = layout.encoding === 'int16' ? buffer.readInt16LE(at) : layout.encoding === 'int24' ? buffer.readIntLE(at, 3) : buffer.readFloatLE(at);
      }
    });
    let at = bufferStart;
    if (widener !== null) {
      // Adjacent int16 channels, from the frame buffer into the blocks in one pass of the kernel.
      const bytes = xBuffer.BYTES_PER_ELEMENT;
      (asStored ? widener.split : widener.widen)(bufferAt + at + xByte, blockAlign, frames, xBuffer.byteOffset + bytes * count, yBuffer.byteOffset + bytes * count);
      at += frames * blockAlign;
    } else if (int16View !== null) {
      deinterleave(int16View, (at + xByte) >> 1, (at + yByte) >> 1, blockAlign >> 1, xBuffer, yBuffer, count, frames);
      at += frames * blockAlign;
    } else if (float32View !== null) {
      deinterleave(float32View, (at + xByte) >> 2, (at + yByte) >> 2, blockAlign >> 2, xBuffer, yBuffer, count, frames);
      at += frames * blockAlign;
    } else if (layout.encoding === 'int16') {
      for (let i = count; i < count + frames; i++, at += blockAlign) {
        xBuffer[i] = ((buffer[at + xByte]! | (buffer[at + xByte + 1]! << 8)) << 16) >> 16;
        yBuffer[i] = ((buffer[at + yByte]! | (buffer[at + yByte + 1]! << 8)) << 16) >> 16;
      }
    } else if (layout.encoding === 'int24') {
      for (let i = count; i < count + frames; i++, at += blockAlign) {
        xBuffer[i] = ((buffer[at + xByte]! | (buffer[at + xByte + 1]! << 8) | (buffer[at + xByte + 2]! << 16)) << 8) >> 8;
        yBuffer[i] = ((buffer[at + yByte]! | (buffer[at + yByte + 1]! << 8) | (buffer[at + yByte + 2]! << 16)) << 8) >> 8;
      }
    } else {
      for (let i = count; i < count + frames; i++, at += blockAlign) {
        xBuffer[i] = buffer.readFloatLE(at + xByte);
        yBuffer[i] = buffer.readFloatLE(at + yByte);
      }
    }
    bufferStart = at;
  }

  async function fillBlock(): Promise<number> {
    if (pendingError !== null) throw pendingError;
    let count = 0;
    try {
      while (count < blockSize) {
        let frames = Math.floor((bufferEnd - bufferStart) / blockAlign);
        if (frames === 0) {
          if (!(await refill())) break;
          frames = Math.floor((bufferEnd - bufferStart) / blockAlign);
          if (frames === 0) continue;
        }
        frames = Math.min(frames, blockSize - count);
        decode(count, frames);
        count += frames;
      }
    } catch (error) {
      if (count === 0) throw error;
      pendingError = error as Error;
    }
    return count;
  }

  if (shared !== undefined) readAhead(0);
  return singlePassCapture(info, handle, { x: xBuffer, y: yBuffer, extra: extraBuffers, t: null }, fillBlock, firstFrame, shared?.release);
}

/**
 * x and y of `frames` frames from a little-endian view of the read buffer (elements `xAt`, `yAt` of the first frame,
 * `stride` elements a frame) into the blocks from `count`. A plain function of its arguments: as a closure over the
 * reader's state, V8 kept the loop at about 8 ns a sample.
 */
function deinterleave(view: Int16Array | Float32Array, xAt: number, yAt: number, stride: number, x: BlockSamples, y: BlockSamples, count: number, frames: number): void {
  const end = count + frames;
  for (let i = count; i < end; i++, xAt += stride, yAt += stride) {
    x[i] = view[xAt]!;
    y[i] = view[yAt]!;
  }
}

function pickChannel(file: string, layout: WavLayout, names: readonly string[], option: string, selector: ChannelSelector): number {
  const index = typeof selector === 'number' ? selector - 1 : names.indexOf(selector);
  if (index < 0 || index >= layout.channels) {
    throw new CaptureFormatError({
      file,
      byteOffset: layout.dataChunkOffset,
      expected: `channel ${typeof selector === 'number' ? `number ${selector} (1-based)` : `"${selector}"`} for option ${option}, among ${names.join(', ')}`,
    });
  }
  return index;
}

function adcOf(layout: WavLayout): AdcFormat {
  if (layout.encoding === 'int16') return integerAdc('signed', 16);
  if (layout.encoding === 'int24') return integerAdc('signed', 24);
  return { kind: 'float', fullScale: 1 };
}
