// Benchmark of the accelerated front ends (src/accel) against the JavaScript stages, on the core cases' signal:
// the front end alone and the whole pipeline, int16 samples in 4096-sample blocks. Timed in process CPU time
// (process.cpuUsage), median of the passes, so that other processes on the machine weigh less.
import { createPipeline, fastAtan2, type AlarmEvent, type EllipseCalibration, type FrontEnd, type PipelineOptions } from '../../src/core/index.js';
import { createCorrection, createSignalMonitor } from '../../src/core/index.js';
import { createFusedFrontEnd, createPipeline as createDefaultPipeline, createWasmFrontEnd, type WasmFrontEndPrecision } from '../../src/accel/index.js';
import { median, type BenchResult } from '../harness.js';
import { benchSignal, BLOCK, TOTAL_SAMPLES } from './core.js';

const RATE_HZ = 10e6;
const WAVELENGTH_M = 632.9908e-9;
// The calibration benchSignal draws its ellipse from (bench/cases/core.ts).
const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const WARMUP_PASSES = 5;
const PASSES = 15;

export interface Timed {
  name: string;
  pass(): void;
  extra?(): Record<string, number>;
}

function cpuSeconds(): number {
  const { user, system } = process.cpuUsage();
  return (user + system) / 1e6;
}

export function measureCpu(timed: Timed): BenchResult {
  for (let i = 0; i < WARMUP_PASSES; i++) timed.pass();
  const cpu: number[] = [];
  const wall: number[] = [];
  for (let i = 0; i < PASSES; i++) {
    const wallStart = process.hrtime.bigint();
    const cpuStart = cpuSeconds();
    timed.pass();
    cpu.push(cpuSeconds() - cpuStart);
    wall.push(Number(process.hrtime.bigint() - wallStart) / 1e9);
  }
  const perPass = median(cpu);
  return {
    name: timed.name,
    samplesPerSecond: TOTAL_SAMPLES / perPass,
    nsPerSample: (perPass * 1e9) / TOTAL_SAMPLES,
    passes: PASSES,
    extra: { wallNsPerSample: (median(wall) * 1e9) / TOTAL_SAMPLES, ...timed.extra?.() },
  };
}

const VARIANTS: readonly WasmFrontEndPrecision[] = ['f32', 'f64-exact'];

/** Names of the cases `accelCases` measures (those whose engine has WebAssembly SIMD). */
export const ACCEL_CASE_NAMES: readonly string[] = [
  'front-end/int16/block4096/js-stages',
  'front-end/int16/block4096/js-fused',
  ...VARIANTS.map((precision) => `front-end/int16/block4096/wasm-simd-${precision}`),
  'pipeline/int16/block4096/default',
  'pipeline/int16/block4096/plain-js',
  'pipeline/int16/block4096/js-fused',
  ...VARIANTS.map((precision) => `pipeline/int16/block4096/wasm-simd-${precision}`),
];

/** Front end alone and whole pipeline, plain JavaScript and every WebAssembly variant; `only` picks one case. */
export function accelCases(only?: string): BenchResult[] {
  const { x, y } = benchSignal(TOTAL_SAMPLES);
  const blocks = TOTAL_SAMPLES / BLOCK;
  const xs = Array.from({ length: blocks }, (_, b) => x.subarray(b * BLOCK, (b + 1) * BLOCK));
  const ys = Array.from({ length: blocks }, (_, b) => y.subarray(b * BLOCK, (b + 1) * BLOCK));
  const level = new Float32Array(BLOCK);
  const phaseRad = new Float64Array(BLOCK);
  const results: BenchResult[] = [];
  const measureSelected = (timed: Timed): void => {
    if (only === undefined || only === timed.name) results.push(measureCpu(timed));
  };

  // The passes the front ends replace, as the pipeline runs them on a quiet block.
  const correction = createCorrection({ calibration: ellipse });
  const monitor = createSignalMonitor({ adc: { kind: 'int16' } });
  const u = new Float64Array(BLOCK);
  const v = new Float64Array(BLOCK);
  const flags = new Uint8Array(BLOCK);
  const events: AlarmEvent[] = [];
  measureSelected({
    name: 'front-end/int16/block4096/js-stages',
    pass() {
      for (let b = 0; b < blocks; b++) {
        correction.process(xs[b]!, ys[b]!, u, v, BLOCK);
        monitor.process(xs[b]!, ys[b]!, u, v, BLOCK, b * BLOCK, level, flags, events);
        for (let i = 0; i < BLOCK; i++) phaseRad[i] = fastAtan2(v[i]!, u[i]!);
      }
      events.length = 0;
    },
  });

  const fused = createFusedFrontEnd();
  measureSelected({
    name: 'front-end/int16/block4096/js-fused',
    pass() {
      for (let b = 0; b < blocks; b++) fused.process(xs[b]!, ys[b]!, BLOCK, correction.coefficients, -32768, 32767, 0.3, level, 0, 0);
    },
  });

  const frontEnds = new Map<WasmFrontEndPrecision, FrontEnd>();
  for (const precision of VARIANTS) {
    const frontEnd = createWasmFrontEnd({ precision });
    if (frontEnd === null) continue; // no WebAssembly SIMD: only the plain cases are reported
    frontEnds.set(precision, frontEnd);
    let declined = 0;
    measureSelected({
      name: `front-end/int16/block4096/wasm-simd-${precision}`,
      pass() {
        let last = 0;
        declined = 0;
        for (let b = 0; b < blocks; b++) {
          const out = frontEnd.process(xs[b]!, ys[b]!, BLOCK, correction.coefficients, -32768, 32767, 0.3, level, last, 0.9 * (Math.PI / 2));
          if (out !== null) last = out[BLOCK - 1]!;
          else declined++;
        }
      },
      extra: () => ({ declinedBlocks: declined }),
    });
  }

  const options: PipelineOptions = { rateHz: RATE_HZ, wavelengthM: WAVELENGTH_M, fold: 2, calibration: ellipse, adc: { kind: 'int16' } };
  const output = { positionM: new Float64Array(BLOCK), velocityMS: new Float64Array(BLOCK), level, flags };
  const pipelineCase = (name: string, frontEnd: FrontEnd | undefined, create = createPipeline): Timed => {
    const pipeline = create({ ...options, frontEnd });
    return {
      name,
      pass() {
        pipeline.reset();
        for (let b = 0; b < blocks; b++) pipeline.process(xs[b]!, ys[b]!, BLOCK, output, events);
        events.length = 0;
      },
    };
  };
  // The default of the Node entry points (src/accel/pipeline.ts), in CPU time like the reference cases.
  measureSelected(pipelineCase('pipeline/int16/block4096/default', undefined, createDefaultPipeline));
  measureSelected(pipelineCase('pipeline/int16/block4096/plain-js', undefined));
  measureSelected(pipelineCase('pipeline/int16/block4096/js-fused', fused));
  for (const [precision, frontEnd] of frontEnds) {
    measureSelected(pipelineCase(`pipeline/int16/block4096/wasm-simd-${precision}`, frontEnd));
  }
  return results;
}
