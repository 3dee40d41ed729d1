// WAV files assembled byte by byte from the published layout, not by our writer.
// Source: Microsoft/IBM, "Multimedia Programming Interface and Data Specifications 1.0" (1991), RIFF chunks
// (4-byte id, little-endian uint32 size, body padded to an even length) and the WAVE "fmt " fields
// (wFormatTag, nChannels, nSamplesPerSec, nAvgBytesPerSec, nBlockAlign, wBitsPerSample); WAVE_FORMAT_PCM = 1,
// WAVE_FORMAT_IEEE_FLOAT = 3 (mmreg.h); WAVE_FORMAT_EXTENSIBLE = 0xFFFE with cbSize 22, wValidBitsPerSample,
// dwChannelMask and the SubFormat GUID KSDATAFORMAT_SUBTYPE_PCM 00000001-0000-0010-8000-00AA00389B71 (ksmedia.h).
import { afterAll, describe, expect, it, vi } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { writeFileSync } from 'node:fs';
import { CaptureFormatError, openCapture } from '../../src/io/capture/index.js';
import { collect, makeTempDir } from './helpers.js';
import { ascii, chunk, fmtBody, riff, u16, u32 } from './riff-bytes.js';

const dir = makeTempDir();
afterAll(() => dir.remove());

function wavFile(name: string, bytes: Uint8Array): string {
  const path = dir.file(name);
  writeFileSync(path, bytes);
  return path;
}

// Sample bytes of a 16-bit stereo example in the common 44-byte canonical layout: little-endian two's complement,
// left then right in each frame. Decoded by hand: 0x1724 = 5924, 0xF31E = -3298, 0x133C = 4924, 0x143C = 5180,
// 0xF916 = -1770, 0xF918 = -1768.
const PCM16_FRAMES = [0x00, 0x00, 0x00, 0x00, 0x24, 0x17, 0x1e, 0xf3, 0x3c, 0x13, 0x3c, 0x14, 0x16, 0xf9, 0x18, 0xf9];
const PCM16_X = [0, 5924, 4924, -1770];
const PCM16_Y = [0, -3298, 5180, -1768];

describe('WAV chunk sizes that disagree with the file', () => {
  it('warns with the bytes ignored when the data chunk declares less than the file holds', async () => {
    // A data chunk whose size says 4 of its 16 sample bytes (one frame), as an interrupted writer leaves it.
    const bytes = riff([chunk('fmt ', fmtBody(1, 2, 1000, 16)), [...ascii('data'), ...u32(4), ...PCM16_FRAMES]]);
    const got = await collect(wavFile('short-data.wav', bytes), {});
    expect(got.error).toBeNull();
    expect(got.x).toEqual([0]);
    expect(got.info.warnings).toHaveLength(1);
    expect(got.info.warnings[0]).toMatch(/declares 4 bytes, but 12 bytes after the chunks .* are ignored/);
  });

  it('is silent for a well-formed file, also with a LIST chunk after the samples', async () => {
    const after = riff([chunk('fmt ', fmtBody(1, 2, 1000, 16)), chunk('data', PCM16_FRAMES), chunk('LIST', [...ascii('INFO')])]);
    expect((await collect(wavFile('list-after.wav', after), {})).info.warnings).toEqual([]);
  });
});

describe('WAV capture reader', () => {
  it('reads a canonical 16-bit PCM stereo file as ADC counts, with rate and size from the header', async () => {
    const bytes = riff([chunk('fmt ', fmtBody(1, 2, 22050, 16)), chunk('data', PCM16_FRAMES)]);
    expect(bytes.length).toBe(44 + PCM16_FRAMES.length); // the canonical header is 44 bytes
    const got = await collect(wavFile('pcm16.wav', bytes));
    expect(got.error).toBeNull();
    expect(got.x).toEqual(PCM16_X);
    expect(got.y).toEqual(PCM16_Y);
    expect(got.t).toBeNull();
    expect(got.info).toMatchObject({
      format: 'wav',
      rateHz: 22050,
      rateSource: 'header',
      channelNames: ['ch1', 'ch2'],
      sampleEncoding: 'int16',
      totalSamples: 4,
      adc: { kind: 'int16' },
    });
  });

  it('reads 24-bit PCM: sign from bit 23 (0x800000 = -8388608, 0x7FFFFF = 8388607, 0xFFFFFF = -1)', async () => {
    const frames = [0x00, 0x00, 0x80, 0xff, 0xff, 0x7f, 0xff, 0xff, 0xff, 0x01, 0x00, 0x00];
    const got = await collect(wavFile('pcm24.wav', riff([chunk('fmt ', fmtBody(1, 2, 96000, 24)), chunk('data', frames)])));
    expect(got.x).toEqual([-8388608, -1]);
    expect(got.y).toEqual([8388607, 1]);
    expect(got.info.sampleEncoding).toBe('int24');
    // 24-bit codes as a symmetric full scale at the largest code: both extreme codes read as saturated.
    expect(got.info.adc).toEqual({ kind: 'float', fullScale: 8388607 });
  });

  it('reads 32-bit IEEE float as stored (IEEE 754 binary32: 0x3F800000 = 1, 0xBF000000 = -0.5, 0x3E800000 = 0.25)', async () => {
    const frames = [0x00, 0x00, 0x80, 0x3f, 0x00, 0x00, 0x00, 0xbf, 0x00, 0x00, 0x80, 0x3e, 0x00, 0x00, 0x00, 0x00];
    const fmt = [...fmtBody(3, 2, 1000, 32), ...u16(0)];
    const got = await collect(wavFile('float.wav', riff([chunk('fmt ', fmt), chunk('fact', u32(2)), chunk('data', frames)])));
    expect(got.x).toEqual([1, 0.25]);
    expect(got.y).toEqual([-0.5, 0]);
    expect(got.info.sampleEncoding).toBe('float32');
  });

  it('reads WAVE_FORMAT_EXTENSIBLE, picks channels of a 3-channel file and skips unknown and odd-sized chunks', async () => {
    const guidPcm = [0x01, 0x00, 0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71];
    const fmt = [...fmtBody(0xfffe, 3, 8000, 16), ...u16(22), ...u16(16), ...u32(0x7), ...guidPcm];
    const frames = [...u16(1), ...u16(2), ...u16(3), ...u16(0xfffc), ...u16(0xfffb), ...u16(0xfffa)];
    const bytes = riff([chunk('junk', [1, 2, 3]), chunk('fmt ', fmt), chunk('abcd', [9]), chunk('data', frames)]);
    const path = wavFile('ext.wav', bytes);
    const defaults = await collect(path);
    expect(defaults.x).toEqual([1, -4]);
    expect(defaults.y).toEqual([2, -5]);
    expect(defaults.info.channelNames).toEqual(['ch1', 'ch2', 'ch3']);
    const picked = await collect(path, { xChannel: 3, yChannel: 'ch1' });
    expect(picked.x).toEqual([3, -6]);
    expect(picked.y).toEqual([1, -4]);
    expect(picked.info).toMatchObject({ xChannel: 'ch3', yChannel: 'ch1' });
  });

  it('reads key: value metadata from the LIST/INFO comment (ICMT)', async () => {
    const comment = [...ascii('adc_note: demo\nwavelength_m: 6.329908e-7'), 0];
    const info = [...ascii('INFO'), ...chunk('ICMT', comment)];
    const bytes = riff([chunk('fmt ', fmtBody(1, 2, 100, 16)), chunk('LIST', info), chunk('data', PCM16_FRAMES)]);
    const got = await collect(wavFile('info.wav', bytes));
    expect([...got.info.metadata]).toEqual([
      ['adc_note', 'demo'],
      ['wavelength_m', '6.329908e-7'],
    ]);
  });

  it('is found by content whatever the extension', async () => {
    const bytes = riff([chunk('fmt ', fmtBody(1, 2, 100, 16)), chunk('data', PCM16_FRAMES)]);
    expect((await collect(wavFile('named.csv', bytes))).info.format).toBe('wav');
  });
});

describe('WAV capture errors', () => {
  it('stops a truncated data chunk at the end of the file, after the whole frames before it', async () => {
    const declared = [...ascii('data'), ...u32(400)];
    const bytes = Buffer.concat([riff([chunk('fmt ', fmtBody(1, 2, 100, 16))]), Buffer.from(declared), Buffer.from(PCM16_FRAMES.slice(0, 14))]);
    const path = wavFile('truncated.wav', bytes);
    const got = await collect(path, { blockSize: 2 });
    expect(got.x).toEqual(PCM16_X.slice(0, 3));
    const error = got.error as CaptureFormatError;
    expect(error).toBeInstanceOf(CaptureFormatError);
    expect(error.byteOffset).toBe(bytes.length);
    expect(error.message).toBe(`${path} byte 58: expected 386 more bytes of sample data before the end of the file (the data chunk at byte 36 declares 400 bytes)`);
  });

  it('reports a data chunk ending inside a frame', async () => {
    const bytes = riff([chunk('fmt ', fmtBody(1, 2, 100, 16)), chunk('data', PCM16_FRAMES.slice(0, 6))]);
    const got = await collect(wavFile('partial-frame.wav', bytes));
    expect(got.x).toEqual([0]);
    expect((got.error as CaptureFormatError).message).toMatch(/byte 48: expected whole sample frames of 4 bytes \(the data chunk ends 2 bytes into a frame\)$/);
  });

  it.each([
    ['8-bit PCM', fmtBody(1, 2, 100, 8), /byte 20: expected 16- or 24-bit integer PCM \(tag 1\) or 32-bit IEEE float \(tag 3\), got "PCM, 8 bits"/],
    ['64-bit float', fmtBody(3, 2, 100, 64), /got "IEEE float, 64 bits"/],
    ['A-law', fmtBody(6, 2, 100, 8), /got "format tag 0x0006, 8 bits"/],
    ['mono', fmtBody(1, 1, 100, 16), /byte 22: expected at least 2 channels \(x and y\), got "1"/],
    ['rate 0', fmtBody(1, 2, 0, 16), /byte 24: expected a sample rate above 0 Hz/],
  ])('rejects %s with the byte offset of the field', async (_name, fmt, message) => {
    const path = wavFile('unsupported.wav', riff([chunk('fmt ', fmt), chunk('data', PCM16_FRAMES)]));
    await expect(openCapture(path)).rejects.toThrow(message);
  });

  it('rejects a missing fmt or data chunk, a bad form type and an unfinished size placeholder', async () => {
    await expect(openCapture(wavFile('no-fmt.wav', riff([chunk('data', PCM16_FRAMES)])))).rejects.toThrow(/byte 12: expected a "fmt " chunk before the "data" chunk/);
    await expect(openCapture(wavFile('no-data.wav', riff([chunk('fmt ', fmtBody(1, 2, 100, 16))])))).rejects.toThrow(
      /byte 36: expected a "data" chunk before the end of the file/,
    );
    const avi = Buffer.from([...ascii('RIFF'), ...u32(4), ...ascii('AVI ')]);
    await expect(openCapture(wavFile('avi.wav', avi))).rejects.toThrow(/byte 8: expected the form type "WAVE", got "AVI "/);
    const streamed = Buffer.concat([riff([chunk('fmt ', fmtBody(1, 2, 100, 16))]), Buffer.from([...ascii('data'), ...u32(0xffffffff)])]);
    await expect(openCapture(wavFile('streamed.wav', streamed))).rejects.toThrow(/byte 40: expected the data chunk size/);
  });

  it('rejects a text file named .wav and unknown binary content', async () => {
    await expect(openCapture(wavFile('text.wav', Buffer.from('x,y\n1,2\n')))).rejects.toThrow(/text\.wav byte 0: expected the RIFF magic "RIFF", got "x,y\\x0a"/);
    const path = wavFile('blob.bin', Buffer.from([0x7f, 0x45, 0x4c, 0x46, 0x02, 0x01]));
    const error = await openCapture(path).catch((caught: unknown) => caught);
    expect(error).toBeInstanceOf(CaptureFormatError);
    expect((error as CaptureFormatError).byteOffset).toBe(4);
    expect((error as Error).message).toBe(
      `${path} byte 4: expected a RIFF/WAVE file (starting "RIFF", form "WAVE") or CSV text, got "byte 0x02; the file starts with 7f454c460201"`,
    );
    await expect(openCapture(wavFile('empty.dat', Buffer.alloc(0)))).rejects.toThrow(/byte 0: expected a RIFF\/WAVE file or CSV text, not an empty file/);
  });

  it('rejects a time column option and a missing channel', async () => {
    const path = wavFile('opts.wav', riff([chunk('fmt ', fmtBody(1, 2, 100, 16)), chunk('data', PCM16_FRAMES)]));
    await expect(openCapture(path, { timeColumn: 't' })).rejects.toThrow(/timeColumn must be left out: .*wav is WAV, its times follow from the header's sample rate/);
    await expect(openCapture(path, { yChannel: 3 })).rejects.toThrow(/expected channel number 3 \(1-based\) for option yChannel, among ch1, ch2/);
  });
});

describe('WAV reader properties', () => {
  it('delivers each frame\'s x and y channels for any channel count and pick, read chunk size and block size', async () => {
    // Adjacent x and y (channels 1 and 2, 2 and 3 …) take the WebAssembly kernel (int16-widen.wat: eight two-channel
    // frames at a time, other frames one at a time); others, and every pick without WebAssembly, the plain loops.
    await fc.assert(
      fc.asyncProperty(
        fc.integer({ min: 2, max: 4 }).chain((channels) =>
          fc.record({
            channels: fc.constant(channels),
            pick: fc.uniqueArray(fc.integer({ min: 1, max: channels }), { minLength: 2, maxLength: 2 }),
            samples: fc.array(fc.integer({ min: -32768, max: 32767 }), { maxLength: 300 }).map((values) => values.slice(0, values.length - (values.length % channels))),
          }),
        ),
        fc.record({ readChunkBytes: fc.integer({ min: 1, max: 300 }), blockSize: fc.integer({ min: 1, max: 40 }) }),
        fc.boolean(),
        async ({ channels, pick, samples }, sizes, withWebAssembly) => {
          const data = samples.flatMap((value) => u16(value & 0xffff));
          const path = wavFile('property.wav', riff([chunk('fmt ', fmtBody(1, channels, 1000, 16)), chunk('data', data)]));
          // The kernel is made when the capture opens.
          if (!withWebAssembly) vi.stubGlobal('WebAssembly', undefined);
          let got;
          try {
            got = await collect(path, { ...sizes, xChannel: pick[0]!, yChannel: pick[1]! });
          } finally {
            vi.unstubAllGlobals();
          }
          expect(got.error).toBeNull();
          expect(got.contiguous).toBe(true);
          expect(got.x).toEqual(samples.filter((_, i) => i % channels === pick[0]! - 1));
          expect(got.y).toEqual(samples.filter((_, i) => i % channels === pick[1]! - 1));
        },
      ),
      { numRuns: 150 },
    );
  });

  it('delivers two-channel frames through the eight-frame steps of the kernel, their rest and partial frames across reads', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.array(fc.integer({ min: -32768, max: 32767 }), { maxLength: 3000, size: 'max' }).map((values) => values.slice(0, values.length & ~1)),
        fc.record({ readChunkBytes: fc.integer({ min: 1, max: 2000 }), blockSize: fc.integer({ min: 1, max: 700 }), xChannel: fc.constantFrom(1, 2) }),
        async (samples, options) => {
          const path = wavFile('two.wav', riff([chunk('fmt ', fmtBody(1, 2, 1000, 16)), chunk('data', samples.flatMap((value) => u16(value & 0xffff)))]));
          const got = await collect(path, { ...options, yChannel: 3 - options.xChannel });
          expect(got.error).toBeNull();
          expect(got.blockLengths.every((length, k) => length === options.blockSize || k === got.blockLengths.length - 1)).toBe(true);
          expect(got.x).toEqual(samples.filter((_, i) => i % 2 === options.xChannel - 1));
          expect(got.y).toEqual(samples.filter((_, i) => i % 2 === 2 - options.xChannel));
        },
      ),
      { numRuns: 100 },
    );
  });
});
