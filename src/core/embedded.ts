// The signal chain an embedded engine runs, and the entry of its small ES2020 bundle (`npm run bundle:core`):
// the pipeline, its stages, the ellipse fit, alarms and option errors, without metrology, analysis or synthesis.
// Values are listed by name so that the bundle's API, and its size budget, change only on purpose.
export { AlarmBit, alarmKinds, alarmNames, alarmText } from './alarms.js';
export { createCorrection } from './correction.js';
export { createDisplacement } from './displacement.js';
export { createEllipseAccumulator } from './fit/accumulator.js';
export { fromHeydemann } from './fit/ellipse.js';
export { createSignalMonitor } from './monitor.js';
export { OptionError } from './options.js';
export { TWO_PI } from './phase.js';
export { createPipeline } from './pipeline.js';
export { createPhaseTracker } from './tracker.js';
export type * from './alarms.js';
export type * from './correction.js';
export type * from './displacement.js';
export type * from './fit/accumulator.js';
export type * from './fit/ellipse.js';
export type * from './fit/limits.js';
export type * from './monitor.js';
export type * from './pipeline.js';
export type * from './tracker.js';
