// Metrology corrections: refractive index of air, thermal normalisation to 20 °C, dead path, cosine error and the
// GUM uncertainty budget of a reading. Pure functions, called when the environment changes, not per sample.
export { saturationVapourPressurePa, saturationTemperatureRangeC } from './vapour-pressure.js';
export * from './air-index.js';
export * from './thermal.js';
export * from './geometry.js';
export * from './uncertainty.js';
export * from './environment-log.js';
