import { afterAll, describe, expect, it } from 'vitest';
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { createCaptureWriter, openCapture } from '../../src/io/capture/index.js';
import { OptionError } from '../../src/core/options.js';
import { collect, makeTempDir, quadratureCounts } from './helpers.js';

const dir = makeTempDir();
afterAll(() => dir.remove());

function partialFiles(): string[] {
  return readdirSync(dir.path).filter((name) => name.endsWith('.partial'));
}

describe('capture writers', () => {
  // Canonical PCM header (Microsoft/IBM RIFF/WAVE specification, 1991): "RIFF", size = file bytes - 8, "WAVE",
  // "fmt " of 16 bytes (tag 1, channels, rate, bytes/s, block align, bits), "data", data bytes.
  it('writes the canonical 44-byte PCM header with sizes patched at close', async () => {
    const path = dir.file('header.wav');
    const writer = await createCaptureWriter(path, { format: 'wav', rateHz: 22050, encoding: 'int16' });
    await writer.write([0, 5924, 4924], [0, -3298, 5180], 3);
    await writer.write([-1770], [-1768], 1);
    await writer.close();
    const bytes = readFileSync(path);
    expect(bytes.subarray(0, 44).toString('hex')).toBe(
      '52494646' + '34000000' + '57415645' + '666d7420' + '10000000' + '0100' + '0200' + '22560000' + '88580100' + '0400' + '1000' + '64617461' + '10000000',
    );
    expect(bytes.subarray(44).toString('hex')).toBe('00000000' + '24171ef3' + '3c133c14' + '16f918f9');
  });

  it('writes three or four detector outputs per sample (WAV header of 3 channels, CSV of 4 named columns) that read back exactly', async () => {
    // Three channels: block align 3 × 2 bytes, bytes/s = rate × 6 (RIFF/WAVE specification, 1991).
    const wav = dir.file('three.wav');
    const three = await createCaptureWriter(wav, { format: 'wav', rateHz: 1000, encoding: 'int16', channelCount: 3 });
    const outputs = [Int16Array.of(100, -2, 32767), Int16Array.of(5, 6, -32768), Int16Array.of(-7, 8, 9)];
    await three.writeChannels(outputs, 3);
    await three.close();
    const bytes = readFileSync(wav);
    expect(bytes.subarray(20, 36).toString('hex')).toBe('0100' + '0300' + 'e8030000' + '70170000' + '0600' + '1000');
    expect(bytes.readUInt32LE(40)).toBe(18);
    const csv = dir.file('four.csv');
    const four = await createCaptureWriter(csv, { format: 'csv', rateHz: 10, encoding: 'integer-text', channelNames: ['d1', 'd2', 'd3', 'd4'] });
    await four.writeChannels([...outputs, Int16Array.of(1, 2, 3)], 3);
    await four.close();
    expect(readFileSync(csv, 'utf8').split('\n').slice(1, 3)).toEqual(['d1,d2,d3,d4', '100,5,-7,1']);
    for (const [path, channels, expected] of [
      [wav, [1, 2, 3], outputs],
      [csv, ['d1', 'd2', 'd3', 'd4'], [...outputs, Int16Array.of(1, 2, 3)]],
    ] as const) {
      const capture = await openCapture(path, { channels: [...channels] });
      const read: number[][] = channels.map(() => []);
      for await (const block of capture.blocks()) block.channels.forEach((channel, k) => read[k]!.push(...channel.subarray(0, block.length)));
      await capture.close();
      expect(read).toEqual(expected.map((channel) => [...channel]));
    }
    await expect(createCaptureWriter(dir.file('five.csv'), { format: 'csv', rateHz: 1, channelCount: 5 })).rejects.toThrow(/channelCount must be an integer in 2\.\.4/);
    await expect(createCaptureWriter(dir.file('names.csv'), { format: 'csv', rateHz: 1, channelCount: 3, channelNames: ['a', 'b'] })).rejects.toThrow(/channelNames must be 3 names/);
    const pair = await createCaptureWriter(dir.file('pair.csv'), { format: 'csv', rateHz: 1 });
    await expect(pair.writeChannels(outputs, 3)).rejects.toThrow(/takes 2 channels \(x, y\); got 3/);
    await pair.abort();
  });

  it('writes float32 with a fact chunk and metadata in LIST/INFO, and reads back the same values and metadata', async () => {
    const path = dir.file('float.wav');
    const writer = await createCaptureWriter(path, { format: 'wav', rateHz: 1000, encoding: 'float32', metadata: { note: 'invented demo', wavelength_m: '6.329908e-7' } });
    const x = [0.1, -1, 2.5];
    const y = [Math.PI, 0, -0.25];
    await writer.write(x, y, 3);
    await writer.close();
    const bytes = readFileSync(path);
    const fact = bytes.indexOf('fact');
    expect(bytes.readUInt32LE(fact + 8)).toBe(3); // dwSampleLength: frames
    expect(bytes.readUInt32LE(4)).toBe(bytes.length - 8);
    const got = await collect(path);
    expect(got.x).toEqual(x.map(Math.fround));
    expect(got.y).toEqual(y.map(Math.fround));
    expect(Object.fromEntries(got.info.metadata)).toEqual({ note: 'invented demo', wavelength_m: '6.329908e-7' });
  });

  it('writes CSV with rate, metadata, names and an optional t column that read back exactly', async () => {
    const path = dir.file('out.csv');
    const writer = await createCaptureWriter(path, {
      format: 'csv',
      rateHz: 3,
      channelNames: ['a', 'b'],
      timeColumn: true,
      metadata: { adc: 'int12', source: 'invented test signal' },
    });
    await writer.write(Float64Array.of(0.1, 1e-300, -0), Float64Array.of(NaN, Infinity, 7), 3);
    await writer.close();
    const text = readFileSync(path, 'utf8');
    expect(text.split('\n').slice(0, 4)).toEqual(['# rate_hz: 3', '# adc: int12', '# source: invented test signal', 't,a,b']);
    const got = await collect(path, { xChannel: 'a', yChannel: 'b' });
    expect(got.x).toEqual([0.1, 1e-300, 0]);
    expect(got.y).toEqual([NaN, Infinity, 7]);
    expect(got.t).toEqual([0, 1 / 3, 2 / 3]);
    expect(got.info).toMatchObject({ rateHz: 3, rateSource: 'metadata', adc: { kind: 'float', fullScale: 2047 } });
  });

  it('keeps the target absent until close, writing beside it under a .partial name', async () => {
    const path = dir.file('pending.csv');
    const writer = await createCaptureWriter(path, { format: 'csv', rateHz: 1, encoding: 'integer-text' });
    await writer.write([1, 2], [3, 4], 2);
    expect(existsSync(path)).toBe(false);
    expect(partialFiles()).toHaveLength(1);
    await writer.close();
    expect(existsSync(path)).toBe(true);
    expect(partialFiles()).toEqual([]);
    expect(writer.samplesWritten).toBe(2);
  });

  it('abort removes the partial file and never creates the target', async () => {
    const path = dir.file('aborted.wav');
    const writer = await createCaptureWriter(path, { format: 'wav', rateHz: 1 });
    await writer.write([1], [2], 1);
    await writer.abort();
    expect(existsSync(path)).toBe(false);
    expect(partialFiles()).toEqual([]);
  });

  it('refuses out-of-range or fractional integer samples, then accepts only abort', async () => {
    const path = dir.file('range.wav');
    const writer = await createCaptureWriter(path, { format: 'wav', rateHz: 1, encoding: 'int16' });
    await expect(writer.write([1, 32768], [0, 0], 2)).rejects.toThrow(/sample 1 of x is 32768; int16 WAV takes integers in -32768\.\.32767/);
    await expect(writer.close()).rejects.toThrow(/an earlier write failed; call abort\(\)/);
    await writer.abort();
    expect(existsSync(path)).toBe(false);
    expect(partialFiles()).toEqual([]);
    const text = await createCaptureWriter(dir.file('range.csv'), { format: 'csv', rateHz: 1, encoding: 'integer-text' });
    await expect(text.write([0.5], [0], 1)).rejects.toThrow(/sample 0 of x is 0\.5; integer-text takes safe integers only/);
    await text.abort();
  });

  it('validates its options', async () => {
    const path = dir.file('never.wav');
    await expect(createCaptureWriter(path, { format: 'wav', rateHz: 0 })).rejects.toThrow('rateHz must be a positive finite number (got 0)');
    await expect(createCaptureWriter(path, { format: 'wav', rateHz: 0 })).rejects.toThrow(OptionError);
    await expect(createCaptureWriter(path, { format: 'wav', rateHz: 10.5 })).rejects.toThrow(/rateHz must be an integer for WAV/);
    await expect(createCaptureWriter(path, { format: 'wav', rateHz: 10, encoding: 'decimal-text' })).rejects.toThrow(
      'encoding must be one of int16, int24, float32 for wav (got "decimal-text")',
    );
    await expect(createCaptureWriter(path, { format: 'wav', rateHz: 10, channelNames: ['a', 'b'] })).rejects.toThrow(/channelNames must be left out for WAV/);
    await expect(createCaptureWriter(path, { format: 'csv', rateHz: 10, metadata: { rate_hz: '5' } })).rejects.toThrow('metadata keys must be other than "rate_hz" (give rateHz instead) (got "rate_hz")');
    await expect(createCaptureWriter(path, { format: 'csv', rateHz: 10, metadata: { 'bad key': '5' } })).rejects.toThrow(/metadata keys must be names matching/);
    await expect(createCaptureWriter(path, { format: 'csv', rateHz: 10, channelNames: ["x", "x"] })).rejects.toThrow(/channelNames must be different names/);
    expect(partialFiles()).toEqual([]);
  });
});

describe('the same capture as WAV and as CSV', () => {
  it.each([
    ['int16', 'integer-text', 30000],
    ['int24', 'integer-text', 7_900_000],
  ] as const)('gives the same samples: %s WAV and %s CSV', async (wavEncoding, csvEncoding, amplitude) => {
    const { x, y } = quadratureCounts(20_000, amplitude);
    const wavPath = dir.file(`same-${wavEncoding}.wav`);
    const csvPath = dir.file(`same-${wavEncoding}.csv`);
    for (const [path, format, encoding] of [
      [wavPath, 'wav', wavEncoding],
      [csvPath, 'csv', csvEncoding],
    ] as const) {
      const writer = await createCaptureWriter(path, { format, rateHz: 250_000, encoding });
      for (let start = 0; start < x.length; start += 3000) {
        const end = Math.min(x.length, start + 3000);
        await writer.write(x.subarray(start, end), y.subarray(start, end), end - start);
      }
      await writer.close();
    }
    const fromWav = await collect(wavPath, { blockSize: 4096 });
    const fromCsv = await collect(csvPath, { blockSize: 1000, readChunkBytes: 777 });
    expect(fromWav.x).toEqual([...x]);
    expect(fromCsv.x).toEqual(fromWav.x);
    expect(fromCsv.y).toEqual(fromWav.y);
    expect(fromCsv.info.rateHz).toBe(fromWav.info.rateHz);
    expect(fromCsv.info.sampleEncoding).toBe('integer-text');
    expect(fromWav.info.totalSamples).toBe(x.length);
  });

  it('gives the same samples: float32 WAV and decimal-text CSV', async () => {
    const { x, y } = quadratureCounts(5000, 1);
    const xf = Float64Array.from(x, (v, n) => Math.fround(v * 0.9 + Math.sin(n) * 1e-3));
    const yf = Float64Array.from(y, (v, n) => Math.fround(v * 0.9 - Math.cos(n) * 1e-3));
    const wavPath = dir.file('same-float.wav');
    const csvPath = dir.file('same-float.csv');
    const wav = await createCaptureWriter(wavPath, { format: 'wav', rateHz: 48_000, encoding: 'float32' });
    await wav.write(xf, yf, xf.length);
    await wav.close();
    const text = await createCaptureWriter(csvPath, { format: 'csv', rateHz: 48_000, encoding: 'decimal-text' });
    await text.write(xf, yf, xf.length);
    await text.close();
    const fromWav = await collect(wavPath);
    const fromCsv = await collect(csvPath);
    expect(fromWav.x).toEqual([...xf]);
    expect(fromCsv.x).toEqual(fromWav.x);
    expect(fromCsv.y).toEqual(fromWav.y);
  });
});

describe('capture writer output place', () => {
  it('names the target, not the temporary file, when the folder does not exist', async () => {
    const path = dir.file('missing-folder/out.wav');
    await expect(createCaptureWriter(path, { format: 'wav', rateHz: 1 })).rejects.toThrow(`${path}: cannot create the output file (ENOENT`);
  });
});
