// fringetally accel layer: optional accelerated kernels (WebAssembly SIMD) for the core pipeline.
export {
  createWasmFrontEnd,
  F32_MAX_LEVEL_RELATIVE_ERROR,
  F32_MAX_PHASE_ERROR_RAD,
  type WasmFrontEnd,
  type WasmFrontEndOptions,
  type WasmFrontEndPrecision,
} from './front-end.js';
