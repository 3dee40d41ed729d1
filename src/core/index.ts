// fringetally core: pure signal processing (typed arrays and Math only, no Node built-ins, no packages).
export { AlarmBit, alarmKinds, alarmNames, alarmText, type AlarmEvent, type AlarmKind } from './alarms.js';
export { createCorrection, validateCalibration, type Correction, type CorrectionOptions } from './correction.js';
export {
  createDisplacement,
  validateRefractiveIndex,
  type Displacement,
  type DisplacementOptions,
  type PlaceKernel,
} from './displacement.js';
export * from './fit/index.js';
export {
  adcLimits,
  adcMidScale,
  createSignalMonitor,
  type AdcFormat,
  type SignalMonitor,
  type SignalMonitorOptions,
} from './monitor.js';
export {
  finiteNumber,
  integerInRange,
  MAX_COUNT,
  numberInRange,
  oneOf,
  OptionError,
  positiveFinite,
} from './options.js';
export { FAST_ATAN2_MAX_ERROR_RAD, fastAtan2, TWO_PI, wrapPhase } from './phase.js';
export {
  createPipeline,
  type FrontEnd,
  type Pipeline,
  type PipelineOptions,
  type PipelineOutput,
  type SampleArray,
  type SpeedLimits,
  type SteadyKernel,
} from './pipeline.js';
export {
  aidedAccelerationLimit,
  createPhaseTracker,
  type PhaseTracker,
  type PhaseTrackerOptions,
  type PhaseTrackerOutput,
  type TrackKernel,
  type UnwrapMethod,
} from './tracker.js';
export {
  createQuadratureSynthesizer,
  createRandom,
  type QuadratureSynthesizer,
  type QuadratureSynthesizerOptions,
  type Random,
} from './synthesis.js';
export * from './metrology/index.js';
export { createMotionProfile, type MotionProfile, type MotionSpec } from './motion.js';
export {
  createPeriodicErrorAnalyzer,
  createPhaseDomainEstimator,
  createWindowDetrender,
  type PeriodicErrorAnalyzer,
  type PeriodicErrorAnalyzerOptions,
  type PeriodicErrorBinning,
  type PeriodicErrorSummary,
  type PhaseDomainEstimator,
  type PhaseDomainOptions,
  type PhaseDomainSums,
  type WindowDetrender,
  type WindowDetrenderOptions,
} from './periodic-error.js';
export { createAnalysisSchedule, type AnalysisSchedule, type AnalysisScheduleOptions } from './analysis-schedule.js';
export {
  createTruthComparison,
  type TruthComparison,
  type TruthComparisonOptions,
  type TruthComparisonSummary,
} from './truth-error.js';
export {
  createFft,
  createWelchEstimator,
  cumulativeRms,
  lineRms,
  periodicErrorLinesHz,
  type Detrend,
  type Fft,
  type SpectralDensity,
  type SpectralWindow,
  type WelchEstimator,
  type WelchOptions,
  WELCH_DEFAULTS,
} from './spectrum.js';
export {
  allanAveragingFactors,
  createAveragingDecimator,
  overlappingAllanDeviation,
  type AllanDeviation,
  type AveragingDecimator,
  type AveragingDecimatorOptions,
} from './allan.js';
export {
  channelParametersOf,
  channelsOfEllipse,
  createChannelMomentAccumulator,
  demodulationMatrix,
  ellipseOfChannels,
  MAX_CHANNELS,
  MAX_POWER_VARIATION,
  MIN_CHANNELS,
  normaliseChannels,
  validateChannelParameters,
  type ChannelMomentAccumulator,
  type ChannelParameters,
  type PowerNormalisation,
  type PowerNormalisationResult,
} from './fit/channel-fit.js';
export {
  createChannelCombiner,
  createChannelPipeline,
  type ChannelCombiner,
  type ChannelCombinerOptions,
  type ChannelPipeline,
  type ChannelPipelineOptions,
  type ChannelPipelineOutput,
} from './channels.js';
export {
  createStabilityAnalyzer,
  type StabilityAnalyzer,
  type StabilityAnalyzerOptions,
  type StabilityResult,
  type SteadySpeed,
} from './stability.js';
export {
  assignTargetRun,
  createStopDetector,
  PositioningRunError,
  positioningStatistics,
  type AxisStatistics,
  type Stop,
  type StopDetector,
  type StopDetectorOptions,
  type TargetRun,
  type TargetRunOptions,
  type TargetStatistics,
} from './positioning.js';
export {
  createAxisGeometry,
  type AngleModel,
  type AxisGeometry,
  type AxisGeometryOptions,
  type AxisGeometryOutput,
  type BeamPlacement,
  type PointOfInterest,
} from './axis-geometry.js';
export { createEdgeLatch, type EdgeLatch, type EdgeLatchOptions, type EdgePosition } from './latch.js';
