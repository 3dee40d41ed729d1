// Ellipse fitting: the calibration record, moment sums, the classic and bias-reduced conic fits, coverage, the
// two-pass gated fit of the command line, and the online (drift-tracking) correction. Listed by name, so that
// helpers shared inside the folder stay internal.
export { createEllipseAccumulator } from './accumulator.js';
export type { EllipseAccumulator } from './accumulator.js';
export { createConicSolver, ELLIPSE_FIT_METHODS } from './conic-solver.js';
export type { ConicSolution, ConicSolver, EllipseFitMethod } from './conic-solver.js';
export { fromHeydemann, heydemannFromConic, toHeydemann } from './ellipse.js';
export type { Conic, EllipseCalibration, EllipseFitFailure, EllipseFitResult, FitFrame, HeydemannParameters } from './ellipse.js';
export { exceededLimits, fitWarnings, resolveFitLimits } from './limits.js';
export type { EllipseFitOptions, FitLimits } from './limits.js';
export { createEllipseFit } from './methods.js';
export type { EllipseFit, EllipseFitMethodOptions } from './methods.js';
export { createOnlineCorrection } from './online.js';
export type { OnlineCorrection, OnlineCorrectionOptions, OnlineCorrectionStatus } from './online.js';
export { createResidualAnalyzer, RESIDUAL_ORDERS, residualMeaning } from './residual.js';
export type { RadiusOverTime, ResidualAnalyzer, ResidualAnalyzerOptions, ResidualMeaning, ResidualRun, ResidualSummary } from './residual.js';
export { createHarmonicCorrection, createHarmonicEstimator, MAX_HARMONIC_ORDER } from './harmonics.js';
export type { HarmonicCorrection, HarmonicEstimate, HarmonicEstimator, HarmonicEstimatorOptions, PhaseHarmonics } from './harmonics.js';
export { createModelWatch, MODEL_WATCH_ALARM, MODEL_WATCH_CHUNK_SAMPLES } from './model-watch.js';
export type { ModelWatch, ModelWatchChunkSums, ModelWatchEvent, ModelWatchOptions } from './model-watch.js';
export { createDetectorFit, createTwoPassFit, SPREAD_WINDOWS, spreadWindows } from './two-pass.js';
export type { DetectorFit, DetectorFitResult, TwoPassFit, TwoPassFitOptions } from './two-pass.js';
