// fringetally stream layer: rxjs operators over the core stages, one per file, and the axis builder.
export { type AxisBlock, type CorrectedBlock, type FrameBlock, type PositionBlock } from './blocks.js';
export {
  createAxes,
  createAxesRunner,
  createAxesView,
  type Axes,
  type AxesOptions,
  type AxesRunner,
  type AxesRunnerOptions,
  type AxesUpdate,
  type AxesViewOptions,
  type Axis,
  type AxisAlarmEvent,
  type AxisBlockSummary,
  type AxisOptions,
  type AxisSamples,
  type AxisStatus,
  type AxisUpdate,
  type PositionUpdate,
  type Trace,
  type UpdateOptions,
  type VelocityUpdate,
} from './axes.js';
export { correctQuadrature } from './correct-quadrature.js';
export { deinterleaveAxis, type DeinterleaveAxisOptions } from './deinterleave-axis.js';
export { fitEllipse, type FitEllipseOptions } from './fit-ellipse.js';
export { createPositionBuffers, trackPosition } from './track-position.js';
export { airIndex } from './air-index.js';
export { createRelay, type Relay } from './relay.js';
export {
  axisGeometry,
  createUpdateGeometry,
  type AxisGeometryStreamOptions,
  type GeometryUpdate,
  type UpdateGeometry,
} from './axis-geometry.js';
