import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { NO_EDGES, createLineDecoder, formatSampleLines, splitAxis, type LineDecoderOptions, type MalformedLineReason } from '../../src/io/wire/index.js';
import { copyBlock, type CopiedBlock } from './collect.js';

const text = (s: string) => Uint8Array.from(Buffer.from(s, 'latin1'));

function collect(options: Omit<LineDecoderOptions, 'onBlock' | 'onMalformed'> = {}) {
  const blocks: CopiedBlock[] = [];
  const malformed: [number, MalformedLineReason][] = [];
  const decoder = createLineDecoder({
    ...options,
    onBlock: (block) => blocks.push(copyBlock(block)),
    onMalformed: (line, reason) => malformed.push([line, reason]),
  });
  const samples = () => blocks.flatMap((b) => b.samples);
  return { decoder, blocks, malformed, samples };
}

describe('createLineDecoder options', () => {
  it.each([
    [{ channelCount: 3 }, 'channelCount must be even (got 3)'],
    [{ channelCount: 0 }, 'channelCount must be an integer in 2..16 (got 0)'],
    [{ maxSamplesPerBlock: 0 }, 'maxSamplesPerBlock must be an integer in 1..4096 (got 0)'],
  ])('rejects %o', (options, message) => {
    expect(() => createLineDecoder({ ...options, onBlock: () => undefined })).toThrow(message);
  });
});

describe('line decoder', () => {
  it('reads x,y lines into one block per push, with LF or CRLF and spaces around fields', () => {
    const { decoder, blocks } = collect();
    expect(decoder.push(text('1,2\n-3, 4\r\n  32767 ,-32768\n+5,6\n'))).toBe(4);
    expect(blocks).toHaveLength(1);
    expect(blocks[0]).toMatchObject({ channelCount: 2, samplesPerFrame: 4, sequence: 0, sampleIndex: 0 });
    expect(blocks[0]!.samples).toEqual([1, 2, -3, 4, 32767, -32768, 5, 6]);
    expect(blocks[0]!.sampleRateHz).toBeNaN();
    expect(decoder.counters).toMatchObject({ lines: 4, linesGood: 4, linesMalformed: 0 });
  });

  it('reads several axes per line and splits them per axis', () => {
    const { decoder, blocks } = collect({ channelCount: 4 });
    decoder.push(text('1,2,3,4\n5,6,7,8\n'));
    const x = new Float64Array(2);
    const y = new Float64Array(2);
    const block = { ...blocks[0]!, ...NO_EDGES, samples: Int16Array.from(blocks[0]!.samples) };
    expect(splitAxis(block, 1, x, y)).toBe(2);
    expect([...x, ...y]).toEqual([3, 7, 4, 8]);
    expect(() => splitAxis(block, 2, x, y)).toThrow('axis must be an integer in 0..1 (got 2)');
    expect(() => splitAxis(block, 0, new Float64Array(1), y)).toThrow('x and y must hold samplesPerFrame = 2 values (got 1 and 2)');
  });

  it('counts malformed lines with their line numbers and never throws', () => {
    const { decoder, malformed, samples } = collect();
    decoder.push(text('1,2\nhello\n3\n4,5,6\n,7\n8,\n40000,1\n-32769,0\n1 2,3\n- 1,2\n\n   \n9,10\n'));
    expect(malformed).toEqual([
      [2, 'bad character'],
      [3, 'too few fields'],
      [4, 'too many fields'],
      [5, 'empty field'],
      [6, 'empty field'],
      [7, 'out of range'],
      [8, 'out of range'],
      [9, 'bad character'],
      [10, 'bad character'],
    ]);
    expect(samples()).toEqual([1, 2, 9, 10]);
    expect(decoder.counters).toEqual({ lines: 13, linesGood: 2, linesMalformed: 9, blankLines: 2, lastMalformedLine: 10 });
  });

  it('holds an unfinished line across chunks and finishes it on end()', () => {
    const { decoder, samples } = collect();
    decoder.push(text('12'));
    decoder.push(text('3,-4'));
    expect(samples()).toEqual([]);
    decoder.push(text('5\n6,'));
    expect(samples()).toEqual([123, -45]);
    decoder.push(text('7'));
    expect(decoder.end()).toBe(1);
    expect(samples()).toEqual([123, -45, 6, 7]);
  });

  it('cuts blocks at maxSamplesPerBlock with running sample indices and block counters', () => {
    const { decoder, blocks } = collect({ maxSamplesPerBlock: 2 });
    decoder.push(text('1,1\n2,2\n3,3\n4,4\n5,5\n'));
    expect(blocks.map((b) => [b.sequence, b.sampleIndex, b.samplesPerFrame])).toEqual([[0, 0, 2], [1, 2, 2], [2, 4, 1]]);
  });

  it('reset() behaves like new', () => {
    const input = text('1,2\nbad\n3,4\n');
    const fresh = collect();
    fresh.decoder.push(input);
    const used = collect();
    used.decoder.push(text('9,9\n9,'));
    used.decoder.reset();
    used.blocks.length = 0;
    used.malformed.length = 0;
    used.decoder.push(input);
    expect(used.blocks).toEqual(fresh.blocks);
    expect(used.malformed).toEqual(fresh.malformed);
    expect({ ...used.decoder.counters }).toEqual({ ...fresh.decoder.counters });
  });

  it('property: any chunking of formatted lines gives the same samples; random bytes never throw', () => {
    fc.assert(
      fc.property(
        fc.constantFrom(2, 4, 6),
        fc.array(fc.integer({ min: -32768, max: 32767 }), { maxLength: 120 }),
        fc.array(fc.nat(), { maxLength: 10 }),
        fc.uint8Array({ maxLength: 200 }),
        (channelCount, values, cutSeeds, noise) => {
          const rows = Math.floor(values.length / channelCount);
          const bytes = text(formatSampleLines(values, channelCount, rows));
          const { decoder, samples } = collect({ channelCount, maxSamplesPerBlock: 7 });
          const cuts = [...new Set(cutSeeds.map((c) => c % (bytes.length + 1)))].sort((a, b) => a - b);
          let previous = 0;
          for (const cut of [...cuts, bytes.length]) {
            decoder.push(bytes.subarray(previous, cut));
            previous = cut;
          }
          decoder.end();
          expect(samples()).toEqual(values.slice(0, rows * channelCount));
          expect(decoder.counters.linesMalformed).toBe(0);
          const noisy = collect({ channelCount });
          noisy.decoder.push(noise);
          noisy.decoder.end();
          expect(noisy.decoder.counters.linesGood + noisy.decoder.counters.linesMalformed + noisy.decoder.counters.blankLines).toBe(
            noisy.decoder.counters.lines,
          );
        },
      ),
      { numRuns: 300 },
    );
  });
});
