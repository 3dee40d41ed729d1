// fringetally core: pure signal processing (typed arrays and Math only, no Node built-ins, no packages).
export * from './alarms.js';
export * from './correction.js';
export * from './displacement.js';
export * from './ellipse.js';
export * from './monitor.js';
export * from './options.js';
export * from './phase.js';
export * from './pipeline.js';
export * from './tracker.js';
export * from './synthesis.js';
export * from './metrology/index.js';
export * from './motion.js';
export * from './periodic-error.js';
export * from './fit-improved.js';
export * from './online-correction.js';
export * from './spectrum.js';
export * from './allan.js';
