// `--reference`: the same chain in plain C (libm atan2), in vectorised C (polynomial atan2, gcc -march=native)
// and as a minimal JavaScript loop, beside the pipeline cases of the same run, so that their ratios can be read
// on whatever CPU runs them (bench/reference/chain.c says what each C variant does). Every figure here is
// process CPU time, median of 15 passes after 5 warm-up passes, 2^22 int16 samples in 4096-sample blocks.
import { execFileSync } from 'node:child_process';
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { readFileSync } from 'node:fs';
import { cpus, tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { createPipeline, type EllipseCalibration } from '../../src/core/index.js';
import type { BenchResult } from '../harness.js';
import { measureCpu } from './accel.js';
import { benchSignal, TOTAL_SAMPLES } from './core.js';

const RATE_HZ = 10e6;
const WAVELENGTH_M = 632.9908e-9;
// The calibration benchSignal draws its ellipse from (bench/cases/core.ts).
const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };

export const JS_MINIMAL_CASE = 'reference/js-minimal-loop';

/**
 * The chain as a short JavaScript loop would write it: correction, Math.atan2, unwrapping and position, without
 * the velocity loop, the level, alarms or flags. What the pipeline must at least match.
 */
export function jsMinimalCase(): BenchResult {
  const { x, y } = benchSignal(TOTAL_SAMPLES);
  const positionM = new Float64Array(4096);
  const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = ellipse;
  const ux = 1 / amplitudeX, u0 = -offsetX / amplitudeX;
  const vy = 1 / (amplitudeY * Math.cos(phaseErrorRad)), vx = -Math.tan(phaseErrorRad) / amplitudeX;
  const v0 = -offsetY * vy - offsetX * vx;
  const perRad = WAVELENGTH_M / 2 / (2 * Math.PI), perFringe = WAVELENGTH_M / 2;
  let checksum = 0;
  const result = measureCpu({
    name: JS_MINIMAL_CASE,
    pass() {
      let last = 0;
      let turns = 0;
      for (let b = 0; b < TOTAL_SAMPLES; b += 4096) {
        for (let i = 0; i < 4096; i++) {
          const xi = x[b + i]!, yi = y[b + i]!;
          const theta = Math.atan2(vx * xi + vy * yi + v0, ux * xi + u0);
          const d = theta - last;
          if (d > Math.PI) turns--;
          else if (d <= -Math.PI) turns++;
          last = theta;
          positionM[i] = turns * perFringe + theta * perRad;
        }
        checksum += positionM[4095]!;
      }
    },
  });
  if (checksum === 42) process.stdout.write('');
  return result;
}

const SOURCE = resolve(dirname(fileURLToPath(import.meta.url)), '../../../bench/reference/chain.c');

/** How each C variant is built: plain for the compiler's default target and for this CPU, vectorised for this CPU. */
const C_VARIANTS = [
  { name: 'reference/c-plain-libm', variant: 'plain', flags: ['-O3'] },
  { name: 'reference/c-plain-libm-native', variant: 'plain', flags: ['-O3', '-march=native'] },
  { name: 'reference/c-vectorised-poly', variant: 'vectorised', flags: ['-O3', '-march=native', '-fno-math-errno'] },
] as const;

export function gccVersion(): string | null {
  try {
    return execFileSync('gcc', ['-dumpfullversion'], { encoding: 'utf8' }).trim();
  } catch {
    return null;
  }
}

/** The C variants compiled, with benchSignal's samples written for them: each `run` is a fresh measurement. */
export interface CompiledReference {
  readonly names: readonly string[];
  /** Runs the named variant once (median of 15 passes after 5 warm-up passes, process CPU time). */
  run(name: string): BenchResult;
  dispose(): Promise<void>;
}

/** Compiles the C variants; throws when gcc is missing. */
export async function compileReference(): Promise<CompiledReference> {
  const dir = await mkdtemp(join(tmpdir(), 'fringetally-reference-'));
  try {
    const { x, y } = benchSignal(TOTAL_SAMPLES);
    const signal = join(dir, 'signal.bin');
    const bytes = new Uint8Array(4 * TOTAL_SAMPLES);
    bytes.set(new Uint8Array(x.buffer, x.byteOffset, 2 * TOTAL_SAMPLES), 0);
    bytes.set(new Uint8Array(y.buffer, y.byteOffset, 2 * TOTAL_SAMPLES), 2 * TOTAL_SAMPLES);
    await writeFile(signal, bytes);
    // The parameters the pipeline itself resolves, so that both compute the same chain.
    const pipeline = createPipeline({ rateHz: RATE_HZ, wavelengthM: WAVELENGTH_M, fold: 2, calibration: ellipse, adc: { kind: 'int16' } });
    const { correction, monitor, tracker, displacement } = pipeline.stages;
    const omegaT = (2 * Math.PI * tracker.options.bandwidthHz) / RATE_HZ;
    const perFringe = displacement.metresPerFringe;
    const parameters = [
      ...correction.coefficients, monitor.options.lowSignalLevel, monitor.limits.low, monitor.limits.high,
      Math.SQRT2 * omegaT, omegaT * omegaT, perFringe, perFringe / (2 * Math.PI), (perFringe / (2 * Math.PI)) * RATE_HZ,
    ].map((value) => value.toPrecision(17));
    for (const { name, flags } of C_VARIANTS) execFileSync('gcc', [...flags, '-o', join(dir, name.replace('/', '-')), SOURCE, '-lm'], { stdio: ['ignore', 'ignore', 'inherit'] });
    return {
      names: C_VARIANTS.map(({ name }) => name),
      run(name) {
        const { variant } = C_VARIANTS.find((entry) => entry.name === name)!;
        const output = JSON.parse(execFileSync(join(dir, name.replace('/', '-')), [variant, signal, String(TOTAL_SAMPLES), ...parameters], { encoding: 'utf8' })) as { secondsPerPass: number };
        return { name, samplesPerSecond: TOTAL_SAMPLES / output.secondsPerPass, nsPerSample: (output.secondsPerPass * 1e9) / TOTAL_SAMPLES, passes: 15 };
      },
      dispose: () => rm(dir, { recursive: true, force: true }),
    };
  } catch (error) {
    await rm(dir, { recursive: true, force: true });
    throw error;
  }
}

/** What figures from different machines must not be compared without: CPU model and feature flags. */
export function machine(): { cpuModel: string; cpuFlags: string[]; cores: number; node: string; gcc: string | null } {
  let model = cpus()[0]?.model ?? 'unknown';
  let flags: string[] = [];
  try {
    const info = readFileSync('/proc/cpuinfo', 'utf8');
    model = /^model name\s*:\s*(.*)$/m.exec(info)?.[1] ?? model;
    flags = (/^flags\s*:\s*(.*)$/m.exec(info)?.[1] ?? '').split(/\s+/).filter((flag) => flag.length > 0);
  } catch {
    // not Linux: the model from os.cpus() only
  }
  return { cpuModel: model, cpuFlags: flags, cores: cpus().length, node: process.version, gcc: gccVersion() };
}
