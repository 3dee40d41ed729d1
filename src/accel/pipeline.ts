// The pipeline with the fastest front end that gives the JavaScript stages' results to the bit: the Node entry
// points (the package root, src/stream, src/io, the tool) build their pipelines here. The core's own
// `createPipeline` stays plain, so the embedded bundle (docs/embedded.md) carries no front end.
import { createPipeline as createPlainPipeline, type FrontEnd, type Pipeline, type PipelineOptions, type SampleArray } from '../core/index.js';
import { createWasmFrontEnd } from './front-end.js';
import { createFusedFrontEnd } from './fused-front-end.js';
import { createWasmSteadyKernel } from './steady-kernel.js';

/** Which kernels an exact front end runs: int16 and float64 blocks in WebAssembly SIMD where it exists, everything else fused. */
export type ExactFrontEndKind = 'wasm-simd-f64-exact+js-fused' | 'js-fused';

export interface ExactFrontEnd extends FrontEnd {
  readonly kind: ExactFrontEndKind;
}

/**
 * The fastest bit-identical front end here: the `f64-exact` WebAssembly kernel for Int16Array and Float64Array
 * blocks where WebAssembly SIMD exists, the fused JavaScript loop for other sample types and where it does not.
 */
export function createExactFrontEnd(): ExactFrontEnd {
  const fused = createFusedFrontEnd();
  const wasm = createWasmFrontEnd({ precision: 'f64-exact' });
  if (wasm === null) return { kind: 'js-fused', process: fused.process };
  return {
    kind: 'wasm-simd-f64-exact+js-fused',
    process(x: SampleArray, y: SampleArray, ...rest) {
      // Only the type decides: a block the kernel declines for its signal, the fused loop would decline too.
      const kernel = (x instanceof Int16Array && y instanceof Int16Array) || (x instanceof Float64Array && y instanceof Float64Array);
      return kernel ? wasm.process(x, y, ...rest) : fused.process(x, y, ...rest);
    },
  };
}

export interface AcceleratedPipelineOptions extends PipelineOptions {
  /**
   * A shared WebAssembly memory for the steady-path kernel (WasmSteadyKernelOptions.memory): its first
   * `steadyKernelBytes()` bytes are the kernel's, and output arrays in the rest are written in place.
   */
  readonly kernelMemory?: WebAssembly.Memory;
}

/**
 * `createPipeline` of the core with the fastest exact path by default: where WebAssembly SIMD exists the steady-path
 * kernel (`createWasmSteadyKernel`: front end, tracker steady loop and displacement in one pass) as `frontEnd` and
 * `kernel`, else `createExactFrontEnd()`. Same outputs and events, faster. Given `frontEnd` or `kernel` (`null`
 * asks for the plain stages), it is the core's `createPipeline` with those.
 */
export function createPipeline(options: AcceleratedPipelineOptions): Pipeline {
  const { kernelMemory, ...plain } = options;
  if (plain.frontEnd !== undefined || plain.kernel !== undefined) return createPlainPipeline(plain);
  const steady = createWasmSteadyKernel(kernelMemory === undefined ? {} : { memory: kernelMemory });
  if (steady === null) return createPlainPipeline({ ...plain, frontEnd: createExactFrontEnd() });
  return createPlainPipeline({ ...plain, frontEnd: steady, kernel: steady });
}
