// Streaming WAV capture reader: sample frames decoded chunk by chunk into x/y blocks; integer samples stay ADC counts.
import type { FileHandle } from 'node:fs/promises';
import { endianness } from 'node:os';
import { CaptureFormatError } from './errors.js';
import { integerAdc } from './metadata.js';
import type { ResolvedCaptureOptions } from './resolved-options.js';
import { singlePassCapture } from './single-pass.js';
import { OptionError } from '../../core/options.js';
import type { AdcFormat } from '../../core/index.js';
import type { Capture, CaptureInfo, ChannelSelector } from './types.js';
import { readWavLayout, type WavLayout } from './wav-header.js';
import { createWasmAxisKernels } from '../../accel/axis-kernels.js';

export async function openWavCapture(file: string, handle: FileHandle, options: ResolvedCaptureOptions): Promise<Capture> {
  const layout = await readWavLayout(file, handle);
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
  // Own ArrayBuffer (not the shared pool) so that frames, which always start at a multiple of blockAlign from 0,
  // are aligned for the Int16Array/Float32Array views on little-endian machines.
  const storage = new ArrayBuffer(options.readChunkBytes + blockAlign);
  const buffer = Buffer.from(storage);
  const littleEndian = endianness() === 'LE';
  const int16View = littleEndian && layout.encoding === 'int16' ? new Int16Array(storage, 0, storage.byteLength >> 1) : null;
  const float32View = littleEndian && layout.encoding === 'float32' ? new Float32Array(storage, 0, storage.byteLength >> 2) : null;
  let bufferStart = 0;
  let bufferEnd = 0;
  let filePosition = dataOffset + firstFrame * blockAlign;
  let reachedEnd = false;

  const blockSize = options.blockSize;
  const xBuffer = new Float64Array(blockSize);
  const yBuffer = new Float64Array(blockSize);
  const extraBuffers = extraChannels.map(() => new Float64Array(blockSize));
  const channelCount = layout.channels;
  // Null without WebAssembly SIMD: the loop then.
  const splitter = int16View !== null && yChannel === xChannel + 1 ? createWasmAxisKernels([2], blockSize) : null;
  let pendingError: Error | null = null;

  // The next chunk is read while this one is decoded (the read runs on libuv's thread pool), then copied in.
  const staging = Buffer.allocUnsafe(options.readChunkBytes);
  let ahead: Promise<number> | null = null;

  function readAhead(): void {
    const wanted = Math.min(options.readChunkBytes, dataEnd - filePosition);
    ahead = wanted === 0 ? Promise.resolve(0) : handle.read(staging, 0, wanted, filePosition).then((result) => result.bytesRead);
    // Awaited (and so thrown) by the next refill; this only keeps a pass that ends early from leaving it unhandled.
    ahead.catch(() => undefined);
  }

  /** Keeps a partial frame, takes the next chunk after it; false when the data chunk is used up. */
  async function refill(): Promise<boolean> {
    if (reachedEnd) return false;
    const carried = bufferEnd - bufferStart;
    buffer.copy(buffer, 0, bufferStart, bufferEnd);
    bufferStart = 0;
    bufferEnd = carried;
    if (ahead === null) readAhead();
    const bytesRead = await ahead!;
    ahead = null;
    staging.copy(buffer, bufferEnd, 0, bytesRead);
    bufferEnd += bytesRead;
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
    readAhead();
    return true;
  }

  function decode(count: number, frames: number): void {
    // Outputs 3 and 4 of three- and four-output detectors: a plain per-sample read, off the two-channel fast paths.
    extraBuffers.forEach((target, index) => {
      const offset = extraChannels[index]! * bytesPerSample;
      for (let i = count, at = bufferStart + offset; i < count + frames; i++, at += blockAlign) {
        target[i] = layout.encoding === 'int16' ? buffer.readInt16LE(at) : layout.encoding === 'int24' ? buffer.readIntLE(at, 3) : buffer.readFloatLE(at);
      }
    });
    let at = bufferStart;
    if (splitter !== null) {
      // Adjacent int16 channels: split in WebAssembly SIMD, then widened by typed-array copies (~1 ns a sample
      // against ~7 for the loop below).
      const first = at >> 1;
      splitter.load(int16View!.subarray(first, first + frames * channelCount), frames, channelCount);
      splitter.split(0, xChannel);
      const [xs, ys] = splitter.regions[0]!.inputs as [Int16Array, Int16Array];
      xBuffer.set(xs.subarray(0, frames), count);
      yBuffer.set(ys.subarray(0, frames), count);
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

  return singlePassCapture(info, handle, { x: xBuffer, y: yBuffer, extra: extraBuffers, t: null }, fillBlock, firstFrame);
}

/**
 * x and y of `frames` frames from a little-endian view of the read buffer (elements `xAt`, `yAt` of the first frame,
 * `stride` elements a frame) into the blocks from `count`. A plain function of its arguments: as a closure over the
 * reader's state, V8 kept the loop at about 8 ns a sample.
 */
function deinterleave(view: Int16Array | Float32Array, xAt: number, yAt: number, stride: number, x: Float64Array, y: Float64Array, count: number, frames: number): void {
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
