// fringetally io layer: capture files, serial link, network feeds.
export * from './wire/index.js';
export * from './serial/index.js';
export * from './capture/index.js';
export * from './results/index.js';
export * from './feed/index.js';
export * from './live/index.js';
