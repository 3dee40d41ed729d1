// fringetally core: pure signal processing (typed arrays and Math only, no Node built-ins, no packages).
export {};
export * from './alarms.js';
