// The ellipse fit's sums and the int16 WAV reading calibrate makes, as ratios within one run: the two-pass fit's
// provisional second pass with src/accel's accumulator, each block summed for both fits at once (addWithin with
// `all`) against the two accumulators fed one after the other (add, then addWithin), beside a plain add; and a pass
// of the WAV reader over a generated int16 capture against reading its bytes alone. The cases alternate round by
// round in this process (medians of the rounds), so that a busy machine slows them alike.
// Run alone: node dist/bench/cases/fit-sums.js [--samples N] [--rounds N]
import { open, mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { createFastEllipseAccumulator } from '../../src/accel/index.js';
import { correctionCoefficients } from '../../src/core/correction.js';
import { openCapture } from '../../src/io/capture/index.js';
import { median, positiveIntegerFlag, type BenchResult } from '../harness.js';
import { generate } from './capture.js';

export interface FitSumsBenchOptions {
  /** Samples of the generated capture; default 2^21. */
  samples?: number;
  /** Rounds of every case; default 15 (after 3 of warm-up). */
  rounds?: number;
}

const BLOCK = 4096;
/** The two-pass fit's gate and band (src/core/fit/two-pass.ts: GATE 0.5, BAND 0.02). */
const LOW = 0.5;
const HIGH = 1.5;
const BAND = 0.02;

export async function fitSumsCases(options: FitSumsBenchOptions = {}): Promise<BenchResult[]> {
  const samples = options.samples ?? 1 << 21;
  const rounds = options.rounds ?? 15;
  const directory = await mkdtemp(join(tmpdir(), 'fringetally-fit-sums-'));
  try {
    const file = await generate(join(directory, 'capture.wav'), 'wav', 'int16', samples);
    // The capture's blocks, kept for the fit cases; its ellipse for the gate.
    const xs: Float64Array[] = [];
    const ys: Float64Array[] = [];
    for await (const block of await openCapture(file.path, { blockSize: BLOCK })) {
      xs.push(block.x.slice(0, block.length));
      ys.push(block.y.slice(0, block.length));
    }
    const all = createFastEllipseAccumulator();
    const gated = createFastEllipseAccumulator();
    for (let b = 0; b < xs.length; b++) all.add(xs[b]!, ys[b]!, xs[b]!.length);
    const fit = all.solve();
    if (!fit.ok) throw new Error(`fit-sums bench: the generated capture does not fit (${fit.message})`);
    const coefficients = correctionCoefficients(fit.calibration, new Float64Array(5));
    const near = new Float64Array(1);
    const chunk = Buffer.allocUnsafe(262_144);

    const cases: Array<{ name: string; run: () => Promise<number> | number; seconds: number[] }> = [
      {
        name: 'fit/add',
        run: () => {
          all.reset();
          for (let b = 0; b < xs.length; b++) all.add(xs[b]!, ys[b]!, xs[b]!.length);
          return all.samples;
        },
      },
      {
        name: 'fit/second-pass/one-after-the-other',
        run: () => {
          all.reset();
          gated.reset();
          for (let b = 0; b < xs.length; b++) {
            all.add(xs[b]!, ys[b]!, xs[b]!.length);
            gated.addWithin!(xs[b]!, ys[b]!, xs[b]!.length, coefficients, LOW, HIGH, BAND, near);
          }
          return all.state.moments[1]! + gated.state.moments[1]!;
        },
      },
      {
        name: 'fit/second-pass/fused',
        run: () => {
          all.reset();
          gated.reset();
          for (let b = 0; b < xs.length; b++) gated.addWithin!(xs[b]!, ys[b]!, xs[b]!.length, coefficients, LOW, HIGH, BAND, near, all);
          return all.state.moments[1]! + gated.state.moments[1]!;
        },
      },
      {
        name: 'wav/int16/read',
        run: async () => {
          let sum = 0;
          for await (const block of await openCapture(file.path, { blockSize: BLOCK })) sum += block.x[0]! + block.y[block.length - 1]!;
          return sum;
        },
      },
      {
        name: 'wav/int16/bytes-alone',
        run: async () => {
          const handle = await open(file.path, 'r');
          let total = 0;
          try {
            for (;;) {
              const { bytesRead } = await handle.read(chunk, 0, chunk.length, total);
              if (bytesRead === 0) return total;
              total += bytesRead;
            }
          } finally {
            await handle.close();
          }
        },
      },
    ].map((entry) => ({ ...entry, seconds: [] as number[] }));

    for (let round = -3; round < rounds; round++) {
      for (const entry of cases) {
        const start = process.hrtime.bigint();
        await entry.run();
        if (round >= 0) entry.seconds.push(Number(process.hrtime.bigint() - start) / 1e9);
      }
    }
    const perPass = (name: string) => median(cases.find((entry) => entry.name === name)!.seconds);
    const ratios: Record<string, Record<string, number>> = {
      'fit/second-pass/fused': { overOneAfterTheOther: perPass('fit/second-pass/fused') / perPass('fit/second-pass/one-after-the-other') },
      'wav/int16/read': { overBytesAlone: perPass('wav/int16/read') / perPass('wav/int16/bytes-alone') },
    };
    return cases.map(({ name }) => ({
      name: `fit-sums/${name}`,
      samplesPerSecond: samples / perPass(name),
      nsPerSample: (perPass(name) * 1e9) / samples,
      passes: rounds,
      ...(ratios[name] === undefined ? {} : { extra: ratios[name] }),
    }));
  } finally {
    await rm(directory, { recursive: true, force: true });
  }
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href) {
  const argv = process.argv.slice(2);
  const samples = positiveIntegerFlag(argv, '--samples');
  const rounds = positiveIntegerFlag(argv, '--rounds');
  const results = await fitSumsCases({ ...(samples === undefined ? {} : { samples }), ...(rounds === undefined ? {} : { rounds }) });
  for (const result of results) {
    const extra = result.extra === undefined ? '' : '  ' + Object.entries(result.extra).map(([key, value]) => `${key} ${value.toFixed(3)}`).join(' ');
    process.stdout.write(`${result.name.padEnd(48)} ${result.nsPerSample.toFixed(2).padStart(7)} ns/sample${extra}\n`);
  }
}
