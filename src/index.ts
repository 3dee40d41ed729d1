// The package root re-exports the core, with the accel layer's `createPipeline` (the fastest exact front end by
// default) in place of the core's plain one; rxjs and io adapters live at ./stream and ./io.
export * from './core/index.js';
export { createPipeline } from './accel/pipeline.js';
