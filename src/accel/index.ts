// fringetally accel layer: accelerated front ends for the core pipeline (WebAssembly SIMD kernels, and a fused
// plain-JavaScript loop where WebAssembly SIMD is missing), and `createPipeline` with the fastest exact one by default.
export {
  createWasmFrontEnd,
  F32_MAX_LEVEL_RELATIVE_ERROR,
  F32_MAX_PHASE_ERROR_RAD,
  type WasmFrontEnd,
  type WasmFrontEndOptions,
  type WasmFrontEndPrecision,
} from './front-end.js';
export { createFusedFrontEnd, type FusedFrontEndOptions } from './fused-front-end.js';
export { createExactFrontEnd, createPipeline, type AcceleratedPipelineOptions, type ExactFrontEnd, type ExactFrontEndKind } from './pipeline.js';
export { createWasmSteadyKernel, steadyKernelBytes, type WasmSteadyKernel, type WasmSteadyKernelOptions } from './steady-kernel.js';
export { createFastEllipseAccumulator, createWasmEllipseAccumulator } from './ellipse-accumulator.js';
export { createModelWatchChunkSums, createPeriodicErrorBinning, createPhaseDomainSums, createResidualRun } from './analysis-kernels.js';
