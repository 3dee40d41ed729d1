// fringetally io layer: capture files, serial link, network feeds.
export * from './wire/index.js';
export * from './serial/index.js';
