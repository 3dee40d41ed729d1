// Metrology corrections: refractive index of air, thermal normalisation to 20 °C, dead path, cosine error and the
// GUM uncertainty budget of a reading. Pure functions, called when the environment changes, not per sample.
export { saturationVapourPressurePa, saturationTemperatureRangeC } from './vapour-pressure.js';
export {
  airIndexEquationNames,
  airIndexEquations,
  airIndexSensitivities,
  airIndexValidity,
  DEFAULT_AIR_INDEX_EQUATION,
  DEFAULT_CO2_PPM,
  refractiveIndexOfAir,
  type AirConditions,
  type AirIndexEquation,
  type AirIndexOptions,
  type AirIndexResult,
  type AirIndexSensitivities,
  type AirQuantity,
  type HumidityForm,
  type ValidityRange,
  type ValidityWarning,
} from './air-index.js';
export {
  lengthAtReferenceTemperatureM,
  materialByKey,
  materials,
  REFERENCE_TEMPERATURE_C,
  type Material,
  type SourceTag,
  type ThermalNormalisationOptions,
} from './thermal.js';
export { cosineErrorM, deadPathCorrectionM, type CosineErrorOptions, type DeadPathOptions } from './geometry.js';
export {
  correctLength,
  readingUncertaintyBudget,
  type CorrectedLength,
  type DeadPathCorrection,
  type LengthCorrectionOptions,
  type MaterialCorrection,
  type ReadingUncertaintyOptions,
  type UncertaintyBudget,
  type UncertaintyContribution,
} from './uncertainty.js';
export { airIndexAt, createEnvironmentSchedule, type EnvironmentRecord, type EnvironmentSchedule } from './environment-log.js';
