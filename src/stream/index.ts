// fringetally stream layer: rxjs operators over the core stages, one per file, and the axis builder.
export * from './blocks.js';
export * from './axes.js';
export * from './correct-quadrature.js';
export * from './deinterleave-axis.js';
export * from './fit-ellipse.js';
export * from './track-position.js';
export { airIndex } from './air-index.js';
export * from './axis-geometry.js';
