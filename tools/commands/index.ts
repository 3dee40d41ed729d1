// The list of subcommands; each lives in its own file in this folder and is loaded only when it runs: importing
// every command at start-up cost about 1 s of CPU (listen's serial and network packages alone 0.7 s), more than a
// replay of 10^7 samples. Names and summaries are repeated here for the overview; tests/tools/cli-commands.test.ts
// checks them against the modules.
import type { Command } from '../cli-kit.js';

export interface CommandEntry {
  readonly name: string;
  readonly summary: string;
  load(): Promise<Command>;
  /** Work to start while the command loads (started before `load`, not awaited). */
  prepare?(): Promise<void>;
}

export const commands: readonly CommandEntry[] = [
  { name: 'simulate', summary: 'write a synthetic capture of an invented scenario and its truth file', load: async () => (await import('./simulate.js')).simulate },
  {
    name: 'calibrate',
    summary: 'fit the ellipse correction to a capture and write cal.json',
    load: async () => (await import('./calibrate.js')).calibrate,
    // The analyses after the fit take the analysis thread on long captures: it starts while the command loads.
    prepare: async () => (await import('../analysis-worker-start.js')).prepareAnalysisThread(),
  },
  {
    name: 'replay',
    summary: 'run the whole pipeline over a capture file',
    load: async () => (await import('./replay.js')).replay,
    // The analysis thread, which long captures take, starts while the command loads.
    prepare: async () => (await import('../analysis-worker-start.js')).prepareAnalysisThread(),
  },
  { name: 'listen', summary: 'live tracking of wire frames from a serial port', load: async () => (await import('./listen.js')).listen },
  { name: 'emulate', summary: 'a virtual ADC: write wire frames of an invented motion to a serial port', load: async () => (await import('./emulate.js')).emulate },
  { name: 'air', summary: 'refractive index of air and wavelength in air (Ciddor, modified Edlén, shop-floor)', load: async () => (await import('./air.js')).air },
  { name: 'spectrum', summary: 'vibration and stability: spectral density, cumulative RMS, Allan deviation', load: async () => (await import('./spectrum.js')).spectrum },
  { name: 'positioning', summary: 'positioning accuracy and repeatability of an axis from a target run', load: async () => (await import('./positioning.js')).positioning },
  { name: 'angles', summary: 'yaw, pitch and a point of interest from several parallel axes', load: async () => (await import('./angles.js')).angles },
  { name: 'demo', summary: 'run calibrate, replay and the report on the bundled demo capture', load: async () => (await import('./demo.js')).demo },
];
