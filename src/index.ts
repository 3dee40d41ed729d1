// The package root re-exports the core; rxjs and io adapters live at ./stream and ./io.
export * from './core/index.js';
