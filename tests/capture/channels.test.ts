// Three- and four-output captures: `channels` picks 2 to 4 columns (CSV) or channels (WAV) by name or 1-based number,
// delivers x, y and the rest in `block.channels`, for any block size. Check values: the bytes and text the tests write
// (RIFF layout per the Microsoft/IBM Multimedia Programming Interface and Data Specifications 1.0, 1991, published).
import { afterAll, describe, expect, it } from 'vitest';
import { writeFileSync } from 'node:fs';
import { openCapture, type OpenCaptureOptions } from '../../src/io/capture/index.js';
import { makeTempDir } from './helpers.js';
import { chunk, fmtBody, riff, u16, u32 } from './riff-bytes.js';

const dir = makeTempDir();
afterAll(() => dir.remove());

async function channelsOf(path: string, options: OpenCaptureOptions) {
  const capture = await openCapture(path, options);
  const columns: number[][] = capture.info.channels.map(() => []);
  for await (const block of capture.blocks()) {
    expect(block.channels[0]).toBe(block.x);
    expect(block.channels[1]).toBe(block.y);
    block.channels.forEach((channel, k) => {
      expect(channel.length).toBe(block.length);
      columns[k]!.push(...channel);
    });
  }
  return { info: capture.info, columns };
}

describe('capture channels', () => {
  const csv = dir.file('four.csv');
  writeFileSync(csv, '# rate_hz: 10\nt,a,b,c,d\n' + Array.from({ length: 7 }, (_, i) => `${i / 10},${i},${10 + i},${20 + i},${30 + i}`).join('\n') + '\n');

  for (const blockSize of [1, 3, 4096]) {
    it(`reads three CSV outputs by name and number in blocks of ${blockSize}`, async () => {
      const { info, columns } = await channelsOf(csv, { channels: ['c', 2, 'd'], blockSize });
      expect(info.channels).toEqual(['c', 'a', 'd']);
      expect([info.xChannel, info.yChannel]).toEqual(['c', 'a']);
      expect(columns).toEqual([
        [20, 21, 22, 23, 24, 25, 26],
        [0, 1, 2, 3, 4, 5, 6],
        [30, 31, 32, 33, 34, 35, 36],
      ]);
    });
  }

  it('reads four int16 WAV channels in any order', async () => {
    const frames = [0, 1, 2].flatMap((i) => [100 + i, -200 - i, 300 + i, -400 - i].flatMap(u16));
    const path = dir.file('four.wav');
    writeFileSync(path, riff([chunk('fmt ', fmtBody(1, 4, 1000, 16)), chunk('data', frames)]));
    const { info, columns } = await channelsOf(path, { channels: [4, 'ch1', 2, 3], blockSize: 2 });
    expect(info.channels).toEqual(['ch4', 'ch1', 'ch2', 'ch3']);
    expect(columns).toEqual([
      [-400, -401, -402],
      [100, 101, 102],
      [-200, -201, -202],
      [300, 301, 302],
    ]);
    const float = dir.file('three-float.wav');
    const floatFrames = [0.5, -0.25, 0.125].flatMap((value) => [...new Uint8Array(Float32Array.of(value, 2 * value, 4 * value).buffer)]);
    writeFileSync(float, riff([chunk('fmt ', [...fmtBody(3, 3, 1000, 32), ...u16(0)]), chunk('fact', u32(3)), chunk('data', floatFrames)]));
    expect((await channelsOf(float, { channels: [1, 2, 3] })).columns[2]).toEqual([2, -1, 0.5]);
  });

  it('refuses a bad channel list, naming the option', async () => {
    await expect(openCapture(csv, { channels: ['a'] })).rejects.toThrow('channels must be a list of 2 to 4 column names or 1-based numbers (got ["a"])');
    await expect(openCapture(csv, { channels: ['a', 'b'], xChannel: 'c' })).rejects.toThrow('channels must be left out when xChannel or yChannel is given');
    await expect(openCapture(csv, { channels: ['a', 'b', 'e'] })).rejects.toThrow('a column named "e" for option channels[2]');
    await expect(openCapture(csv, { channels: ['a', 'b', 0] })).rejects.toThrow('channels[2] must be an integer in 1..65535 (got 0)');
  });
});
