// Capture file benchmarks: reader throughput from a file (CSV and WAV), against simple baselines, the result and
// capture writers' throughput, and peak memory while streaming a large generated capture (it must not grow with the
// file).
// Run alone: node --expose-gc dist/bench/cases/capture.js [--samples N] [--memory-samples N] (e.g. --memory-samples 1e8).
import { createReadStream } from 'node:fs';
import { mkdtemp, open, rm, stat } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createInterface } from 'node:readline';
import { pathToFileURL } from 'node:url';
import { createCaptureWriter, openCapture, type SampleEncoding } from '../../src/io/capture/index.js';
import { createResultWriter, type ResultFormat } from '../../src/io/results/index.js';
import { median, positiveIntegerFlag, type BenchResult } from '../harness.js';

export interface CaptureBenchOptions {
  /** Samples per file for the throughput cases; default 1e6. */
  samples?: number;
  /** Samples of the file streamed for the memory cases; default 4e6 (use 1e8 for the full-size check). */
  memorySamples?: number;
  warmupPasses?: number;
  passes?: number;
}

const BLOCK_SIZE = 4096;
const WRITE_BLOCK = 65_536;

interface Generated {
  readonly path: string;
  readonly bytes: number;
}

/**
 * Writes an invented quadrature test signal (a sine pair with drifting frequency) with our own writer. `decimals`
 * rounds decimal text (6 is typical of acquisition exports; undefined keeps the shortest round-trip text, 16-17 digits).
 */
export async function generate(path: string, format: 'csv' | 'wav', encoding: SampleEncoding, samples: number, decimals?: number): Promise<Generated> {
  const writer = await createCaptureWriter(path, { format, rateHz: 1_000_000, encoding, metadata: { source: 'invented benchmark signal' } });
  const x = new Float64Array(WRITE_BLOCK);
  const y = new Float64Array(WRITE_BLOCK);
  const amplitude = encoding === 'int16' ? 30_000 : encoding === 'int24' ? 8_000_000 : encoding === 'integer-text' ? 2000 : 0.9;
  const integer = encoding !== 'float32' && encoding !== 'decimal-text';
  try {
    for (let start = 0; start < samples; start += WRITE_BLOCK) {
      const length = Math.min(WRITE_BLOCK, samples - start);
      for (let i = 0; i < length; i++) {
        const phase = 2 * Math.PI * 0.01 * (start + i) * (1 + 1e-9 * (start + i));
        const xv = amplitude * Math.cos(phase);
        const yv = amplitude * 0.8 * Math.sin(phase + 0.05);
        x[i] = integer ? Math.round(xv) : decimals === undefined ? xv : Number(xv.toFixed(decimals));
        y[i] = integer ? Math.round(yv) : decimals === undefined ? yv : Number(yv.toFixed(decimals));
      }
      await writer.write(x, y, length);
    }
    await writer.close();
  } catch (error) {
    await writer.abort();
    throw error;
  }
  return { path, bytes: (await stat(path)).size };
}

/**
 * One pass over the capture; returns a checksum so the work cannot be optimised away. `withoutWebAssembly`: opened
 * as on an engine without WebAssembly (the CSV reader then parses every row in JavaScript).
 */
async function readCapture(path: string, withoutWebAssembly = false): Promise<number> {
  const webAssembly = globalThis.WebAssembly;
  if (withoutWebAssembly) (globalThis as { WebAssembly?: unknown }).WebAssembly = undefined;
  let capture;
  try {
    capture = await openCapture(path, { blockSize: BLOCK_SIZE });
  } finally {
    (globalThis as { WebAssembly?: unknown }).WebAssembly = webAssembly;
  }
  let sum = 0;
  for await (const block of capture) sum += block.x[0]! + block.y[block.length - 1]!;
  return sum;
}

/** Baseline: the file's bytes in the reader's chunk size, no decoding. */
async function readRawBytes(path: string): Promise<number> {
  const handle = await open(path, 'r');
  const buffer = Buffer.allocUnsafe(262_144);
  let total = 0;
  try {
    for (;;) {
      const { bytesRead } = await handle.read(buffer, 0, buffer.length, total);
      if (bytesRead === 0) return total;
      total += bytesRead;
    }
  } finally {
    await handle.close();
  }
}

/** Baseline: the plain way, node:readline lines split on commas and converted with Number. */
async function readCsvWithReadline(path: string): Promise<number> {
  let sum = 0;
  let header = true;
  for await (const line of createInterface({ input: createReadStream(path), crlfDelay: Infinity })) {
    if (line.startsWith('#') || line === '') continue;
    if (header) {
      header = false;
      continue;
    }
    const fields = line.split(',');
    sum += Number(fields[0]) + Number(fields[1]);
  }
  return sum;
}

async function time(
  name: string,
  samples: number,
  fileBytes: number,
  pass: () => Promise<number>,
  options: Required<Pick<CaptureBenchOptions, 'warmupPasses' | 'passes'>>,
): Promise<BenchResult> {
  for (let i = 0; i < options.warmupPasses; i++) await pass();
  const seconds: number[] = [];
  for (let i = 0; i < options.passes; i++) {
    const start = process.hrtime.bigint();
    await pass();
    seconds.push(Number(process.hrtime.bigint() - start) / 1e9);
  }
  const perPass = median(seconds);
  return {
    name,
    samplesPerSecond: samples / perPass,
    nsPerSample: (perPass * 1e9) / samples,
    passes: options.passes,
    extra: { samples, fileMB: fileBytes / 1e6, megabytesPerSecond: fileBytes / 1e6 / perPass },
  };
}

/** One pass of the result writer over `samples` rows of an invented motion, to a file that is then removed. */
async function writeResults(path: string, format: ResultFormat, samples: number): Promise<number> {
  const length = BLOCK_SIZE;
  const positionM = new Float64Array(length);
  const velocityMS = new Float64Array(length);
  const level = new Float32Array(length);
  const flags = new Uint8Array(length);
  const writer = await createResultWriter(path, { format, rateHz: 1_000_000 });
  for (let firstIndex = 0; firstIndex < samples; firstIndex += length) {
    for (let i = 0; i < length; i++) {
      const n = firstIndex + i;
      positionM[i] = 0.05 * Math.sin(n * 1e-6);
      velocityMS[i] = 0.05e-6 * Math.cos(n * 1e-6) * 1e6;
      level[i] = 0.9 + 0.01 * Math.sin(n * 1e-3);
      flags[i] = n % 1000 === 0 ? 1 : 0;
    }
    await writer.write({ firstIndex, length: Math.min(length, samples - firstIndex), positionM, velocityMS, level, flags });
  }
  await writer.close();
  const bytes = (await stat(path)).size;
  await rm(path);
  return bytes;
}

/**
 * One pass of the capture writer over `samples` samples of an invented quadrature signal (computed once, outside
 * the timing), to a file that is then removed; returns the file's size.
 */
async function writeCapture(path: string, format: 'csv' | 'wav', encoding: SampleEncoding, signal: { x: Float64Array; y: Float64Array }, samples: number): Promise<number> {
  const writer = await createCaptureWriter(path, { format, rateHz: 1_000_000, encoding });
  for (let start = 0; start < samples; start += WRITE_BLOCK) {
    const length = Math.min(WRITE_BLOCK, samples - start);
    await writer.write(signal.x.subarray(start, start + length), signal.y.subarray(start, start + length), length);
  }
  await writer.close();
  const bytes = (await stat(path)).size;
  await rm(path);
  return bytes;
}

/** The writers' input: the generated signal's integer samples (int16 range), for every encoding alike. */
function writeSignal(samples: number): { x: Float64Array; y: Float64Array } {
  const x = new Float64Array(samples);
  const y = new Float64Array(samples);
  for (let i = 0; i < samples; i++) {
    const phase = 2 * Math.PI * 0.01 * i * (1 + 1e-9 * i);
    x[i] = Math.round(30_000 * Math.cos(phase));
    y[i] = Math.round(24_000 * Math.sin(phase + 0.05));
  }
  return { x, y };
}

const gc = (globalThis as { gc?: () => void }).gc;

/**
 * Streams a capture once while sampling memory every 64 blocks. Growth is measured from the state after opening;
 * without --expose-gc the figures include garbage not yet collected.
 */
async function memoryCase(name: string, file: Generated, samples: number): Promise<BenchResult> {
  gc?.();
  const capture = await openCapture(file.path, { blockSize: BLOCK_SIZE });
  const before = process.memoryUsage();
  let peakHeap = before.heapUsed;
  let peakExternal = before.external + before.arrayBuffers;
  let peakRss = before.rss;
  let blocks = 0;
  let delivered = 0;
  const start = process.hrtime.bigint();
  for await (const block of capture) {
    delivered += block.length;
    if (++blocks % 64 === 0) {
      const now = process.memoryUsage();
      peakHeap = Math.max(peakHeap, now.heapUsed);
      peakExternal = Math.max(peakExternal, now.external + now.arrayBuffers);
      peakRss = Math.max(peakRss, now.rss);
    }
  }
  const seconds = Number(process.hrtime.bigint() - start) / 1e9;
  if (delivered !== samples) throw new Error(`${name}: read ${delivered} samples of ${samples}`);
  const mb = 1 / 1_048_576;
  return {
    name,
    samplesPerSecond: samples / seconds,
    nsPerSample: (seconds * 1e9) / samples,
    passes: 1,
    extra: {
      samples,
      fileMB: file.bytes / 1e6,
      peakHeapGrowthMiB: (peakHeap - before.heapUsed) * mb,
      peakExternalGrowthMiB: (peakExternal - before.external - before.arrayBuffers) * mb,
      peakRssGrowthMiB: (peakRss - before.rss) * mb,
      gcExposed: gc === undefined ? 0 : 1,
    },
  };
}

export async function captureCases(options: CaptureBenchOptions = {}): Promise<BenchResult[]> {
  const samples = options.samples ?? 1_000_000;
  const memorySamples = options.memorySamples ?? 4_000_000;
  const passes = { warmupPasses: options.warmupPasses ?? 1, passes: options.passes ?? 5 };
  const directory = await mkdtemp(join(tmpdir(), 'fringetally-bench-capture-'));
  const results: BenchResult[] = [];
  try {
    const csvInteger = await generate(join(directory, 'integer.csv'), 'csv', 'integer-text', samples);
    // The CSV reader with its WebAssembly row kernel, and without WebAssembly, in the same run.
    results.push(await time(`capture/csv/integer-text/read/block${BLOCK_SIZE}`, samples, csvInteger.bytes, () => readCapture(csvInteger.path), passes));
    results.push(await time(`capture/csv/integer-text/read-no-wasm/block${BLOCK_SIZE}`, samples, csvInteger.bytes, () => readCapture(csvInteger.path, true), passes));
    results.push(await time('capture/csv/integer-text/baseline-readline-split', samples, csvInteger.bytes, () => readCsvWithReadline(csvInteger.path), passes));
    for (const decimals of [6, undefined]) {
      const label = decimals === undefined ? 'decimal-text-17digit' : `decimal-text-${decimals}dp`;
      const csvDecimal = await generate(join(directory, `${label}.csv`), 'csv', 'decimal-text', samples, decimals);
      results.push(await time(`capture/csv/${label}/read/block${BLOCK_SIZE}`, samples, csvDecimal.bytes, () => readCapture(csvDecimal.path), passes));
      results.push(await time(`capture/csv/${label}/read-no-wasm/block${BLOCK_SIZE}`, samples, csvDecimal.bytes, () => readCapture(csvDecimal.path, true), passes));
      results.push(await time(`capture/csv/${label}/baseline-readline-split`, samples, csvDecimal.bytes, () => readCsvWithReadline(csvDecimal.path), passes));
      await rm(csvDecimal.path);
    }
    for (const encoding of ['int16', 'int24', 'float32'] as const) {
      const wav = await generate(join(directory, `${encoding}.wav`), 'wav', encoding, samples);
      results.push(await time(`capture/wav/${encoding}/read/block${BLOCK_SIZE}`, samples, wav.bytes, () => readCapture(wav.path), passes));
      results.push(await time(`capture/wav/${encoding}/baseline-raw-bytes`, samples, wav.bytes, () => readRawBytes(wav.path), passes));
      await rm(wav.path);
    }
    await rm(csvInteger.path);
    for (const format of ['csv', 'jsonl'] as const) {
      const path = join(directory, `results.${format}`);
      const bytes = await writeResults(path, format, samples);
      results.push(await time(`results/${format}/write/every1`, samples, bytes, () => writeResults(path, format, samples), passes));
    }
    const signal = writeSignal(samples);
    for (const [format, encoding] of [
      ['csv', 'integer-text'],
      ['csv', 'decimal-text'],
      ['wav', 'int16'],
    ] as const) {
      const path = join(directory, `written.${format}`);
      const bytes = await writeCapture(path, format, encoding, signal, samples);
      results.push(await time(`capture/${format}/${encoding}/write`, samples, bytes, () => writeCapture(path, format, encoding, signal, samples), passes));
    }
    for (const [format, encoding] of [
      ['wav', 'int16'],
      ['csv', 'integer-text'],
    ] as const) {
      const big = await generate(join(directory, `memory.${format}`), format, encoding, memorySamples);
      results.push(await memoryCase(`capture/${format}/${encoding}/memory/samples${memorySamples}`, big, memorySamples));
      await rm(big.path);
    }
  } finally {
    await rm(directory, { recursive: true, force: true });
  }
  return results;
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href) {
  const argv = process.argv.slice(2);
  const samples = positiveIntegerFlag(argv, '--samples');
  const memorySamples = positiveIntegerFlag(argv, '--memory-samples');
  const results = await captureCases({ ...(samples === undefined ? {} : { samples }), ...(memorySamples === undefined ? {} : { memorySamples }) });
  process.stdout.write(JSON.stringify(results, null, 2) + '\n');
}
