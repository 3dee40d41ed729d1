// `fringetally emulate`: a virtual ADC writing wire frames of an invented motion to a serial port (or a pty) at the
// real-time pace of the sample rate, with optional transport faults, a truth file and a summary of what was sent.
import { writeFile } from 'node:fs/promises';
import { SerialPort } from 'serialport';
import { createCaptureWriter, type CaptureWriter } from '../../src/io/capture/index.js';
import { SERIAL_SOURCE_DEFAULTS } from '../../src/io/serial/index.js';
import { WIRE_MAX_CHANNELS, WIRE_MAX_EDGES_PER_FRAME, WIRE_MAX_SAMPLES_PER_FRAME } from '../../src/io/wire/index.js';
import { LASER_CAUTION, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { ellipseOf, motionOf, noiseOf, scenarioOptionSpecs } from '../scenario-options.js';
import { createFrameEmulator, type TriggerEdges } from '../live/frame-emulator.js';

/** A write the port has not taken after this long ends emulate with an error: nothing reads the port. */
const STALL_MS = 2000;

const help = `Usage: fringetally emulate --port PATH --baud N --rate-hz R --velocity-m-s V --wavelength-nm L --fold F
                          [--duration S] [options]

A virtual ADC for testing a receiver without hardware: simulates an invented motion seen through imperfect
quadrature detectors (offsets, unequal amplitudes, quadrature error, noise; int16 counts) and writes it as
fringetally wire frames (docs/wire-format.md) to PATH, paced in real time: rate / samples-per-frame frames per
second. Positive displacement advances the phase atan2(y, x). Runs for --duration S or until SIGINT/SIGTERM (which end it at once, even while the port takes nothing); when
the port takes nothing for ${STALL_MS / 1000} s (nothing reads it), it stops with exit 1.

Port and frames:
  --port PATH              serial device or pseudo-terminal to write to (required)
  --baud N                 baud rate, Bd (default ${SERIAL_SOURCE_DEFAULTS.baudRate}). A pty ignores it; a real UART carries about N/10 bytes/s
                           and a stream beyond that is warned about
  --rate-hz R              sample rate, Hz, integer (required)
  --samples-per-frame N    samples per frame, 1..${WIRE_MAX_SAMPLES_PER_FRAME} (default 64)
  --include-rate           write the sample-rate field in every frame (else the receiver needs --rate-hz)
  --start-sequence N       sequence number of the first frame, 0..65535 (default 0)
  --axes N                 axes per frame, 1..8 (default 1); axis k carries (k + 1) times the motion
  --outputs N              detector outputs per axis: 2 (default, the ellipse below), 3 (120° apart) or 4
                           (0/90/180/270°), sent with a channel layout (wire format version 3); 3 and 4 use
                           invented outputs I_k = P·(o_k + a_k·cos(φ − θ_k)), offsets 11500..12500 and amplitudes
                           9500..10500 counts (docs/live.md lists them); at most 16 channels in all
  --text                   write "x,y" text lines instead of binary frames (no sequence counter)
  --duration S             seconds of samples to send, rounded up to whole frames (default: until stopped)

Trigger edges (binary frames only; sent as edge records of wire format version 2, line 0, rising, timed to
2^-16 of a sample period; listen --latch-out gives the position at each):
  --trigger-hz F           an edge at t = j/F s, j = 1, 2, … (at most ${WIRE_MAX_EDGES_PER_FRAME} per frame)
  --trigger-at T1,T2,…     edges at these times from the first sample, s, increasing and positive

Optics:
  --wavelength-nm L        vacuum wavelength, nm (required, e.g. 632.9908)
  --fold N                 optical fold: 2 single pass, 4 double-pass plane mirror (required)
  --refractive-index n     refractive index of air (default 1)

Motion (--motion constant|trapezoid|vibration, default constant):
  --velocity-m-s V         constant: velocity, m/s; trapezoid: peak speed, m/s (required for both)
  --distance-m D           trapezoid: move length, m (default 20e-6); moves forth and back
  --acceleration-m-s2 A    trapezoid: acceleration, m/s² (default 20)
  --dwell-s S              trapezoid: pause at each end, s (default 0.002)
  --amplitude-m A          vibration: amplitude, m (default 2e-6)
  --frequency-hz F         vibration: frequency, Hz (default 200)
  --drift-m-s V            vibration: drift velocity, m/s (default 0)

Source power of three or four outputs (P(t) = 1 + M·sin(2π F t), the same factor on every output):
  --power-modulation M     relative amplitude of the power's variation, 0..0.5 (default 0)
  --power-frequency-hz F   its frequency, Hz (default 10)

Detectors of two outputs (ADC counts, x = aX·cos φ + oX, y = aY·sin(φ + e) + oY):
  --offset-x C, --offset-y C          offsets, counts (default 800, -500)
  --amplitude-x C, --amplitude-y C    amplitudes, counts (default 12000, 10800)
  --phase-error-rad E                 quadrature error e, rad (default 0.06)
  --noise C                           Gaussian noise per channel, counts RMS (default 20)
  --seed N                            noise and fault seed, integer (default 1)

Faults (binary frames only; frame numbers count frames made, from 0):
  --garbage-every N        random bytes before frames N, 2N, … (the receiver must resynchronise)
  --garbage-bytes B        bytes per garbage insertion (default 16)
  --drop-every N           frames N−1, 2N−1, … are not sent: the receiver sees a sequence gap
  --corrupt-every N        frames N−1, 2N−1, … get one payload byte inverted: a CRC failure, then a gap
  --pause-every N          stop writing for --pause-ms after every N frames; nothing is lost
  --pause-ms M             length of each pause, ms (default 100)

Output:
  --truth FILE             CSV of every sample made (sent or not): t (s), position_m (m, axis 0), phase_rad
  --summary FILE           JSON: frames made and sent, bytes, and the frame numbers of every injected fault
  --quiet                  no notes and no summary (on standard error)

${LASER_CAUTION}`;

const optionSpecs = {
  port: { type: 'string' },
  baud: { type: 'string' },
  'rate-hz': { type: 'string' },
  'samples-per-frame': { type: 'string' },
  'include-rate': { type: 'boolean' },
  'start-sequence': { type: 'string' },
  axes: { type: 'string' },
  outputs: { type: 'string' },
  'power-modulation': { type: 'string' },
  'power-frequency-hz': { type: 'string' },
  text: { type: 'boolean' },
  duration: { type: 'string' },
  'trigger-hz': { type: 'string' },
  'trigger-at': { type: 'string' },
  'wavelength-nm': { type: 'string' },
  fold: { type: 'string' },
  'refractive-index': { type: 'string' },
  seed: { type: 'string' },
  'garbage-every': { type: 'string' },
  'garbage-bytes': { type: 'string' },
  'drop-every': { type: 'string' },
  'corrupt-every': { type: 'string' },
  'pause-every': { type: 'string' },
  'pause-ms': { type: 'string' },
  truth: { type: 'string' },
  summary: { type: 'string' },
  quiet: { type: 'boolean' },
  ...scenarioOptionSpecs,
} as const;

function integerIn(name: string, value: number, min: number, max: number): number {
  if (!Number.isInteger(value) || value < min || value > max) throw new UsageError(`--${name} must be an integer in ${min}..${max} (got ${value})`);
  return value;
}

function positive(name: string, value: number | undefined): number {
  if (value === undefined) throw new UsageError(`--${name} is required`);
  if (!(value > 0)) throw new UsageError(`--${name} must be positive (got ${value})`);
  return value;
}

const sleep = (ms: number) => new Promise<void>((resolve) => setTimeout(resolve, ms));

function openPort(path: string, baudRate: number): Promise<SerialPort> {
  return new Promise((resolve, reject) => {
    const port = new SerialPort({ path, baudRate }, (error) => {
      if (error) reject(new Error(`${path}: cannot open the port (${error.message})`));
      else resolve(port);
    });
  });
}

async function run(argv: readonly string[]): Promise<number> {
  const { values } = parseCommandLine(argv, optionSpecs, false);
  const text = (name: keyof typeof values) => values[name] as string | undefined;
  const num = (name: keyof typeof values) => numberOption(name, text(name));
  const port = text('port');
  if (port === undefined) throw new UsageError('--port is required');
  const baudRate = integerIn('baud', num('baud') ?? SERIAL_SOURCE_DEFAULTS.baudRate, 1, 20_000_000);
  const rateHz = integerIn('rate-hz', positive('rate-hz', num('rate-hz')), 1, 0xffffffff);
  const samplesPerFrame = integerIn('samples-per-frame', num('samples-per-frame') ?? 64, 1, WIRE_MAX_SAMPLES_PER_FRAME);
  const startSequence = integerIn('start-sequence', num('start-sequence') ?? 0, 0, 65535);
  const axes = integerIn('axes', num('axes') ?? 1, 1, 8);
  const outputs = integerIn('outputs', num('outputs') ?? 2, 2, 4) as 2 | 3 | 4;
  if (outputs * axes > WIRE_MAX_CHANNELS) throw new UsageError(`--axes ${axes} with --outputs ${outputs} makes ${outputs * axes} channels; a frame carries at most ${WIRE_MAX_CHANNELS}`);
  const powerModulation = num('power-modulation');
  const powerFrequencyHz = num('power-frequency-hz');
  if ((powerModulation !== undefined || powerFrequencyHz !== undefined) && outputs === 2) {
    throw new UsageError('--power-modulation and --power-frequency-hz need --outputs 3 or 4 (two outputs cannot tell the power from the signal)');
  }
  if (powerModulation !== undefined && !(powerModulation >= 0 && powerModulation <= 0.5)) throw new UsageError(`--power-modulation must be in 0..0.5 (got ${powerModulation})`);
  if (powerFrequencyHz !== undefined) positive('power-frequency-hz', powerFrequencyHz);
  const durationS = num('duration');
  if (durationS !== undefined) positive('duration', durationS);
  const wavelengthM = positive('wavelength-nm', num('wavelength-nm')) * 1e-9;
  const fold = positive('fold', num('fold'));
  const refractiveIndex = positive('refractive-index', num('refractive-index') ?? 1);
  const seed = integerIn('seed', num('seed') ?? 1, 0, 2 ** 31);
  const textMode = values.text === true;
  const every = (name: keyof typeof values) => integerIn(name, num(name) ?? 0, 0, 2 ** 31);
  const faults = {
    garbageEvery: every('garbage-every'),
    garbageBytes: integerIn('garbage-bytes', num('garbage-bytes') ?? 16, 1, 65536),
    dropEvery: every('drop-every'),
    corruptEvery: every('corrupt-every'),
  };
  const pauseEvery = every('pause-every');
  const pauseMs = positive('pause-ms', num('pause-ms') ?? 100);
  if (textMode && (faults.garbageEvery || faults.dropEvery || faults.corruptEvery)) {
    throw new UsageError('--garbage-every, --drop-every and --corrupt-every apply to binary frames, not --text');
  }
  if (textMode && outputs !== 2) throw new UsageError('--outputs 3 or 4 needs binary frames (the layout travels in them), not --text');
  if (textMode && (values['include-rate'] || text('start-sequence') !== undefined)) {
    throw new UsageError('--include-rate and --start-sequence apply to binary frames, not --text');
  }

  const triggers = triggersOf(text('trigger-hz'), text('trigger-at'), rateHz, samplesPerFrame);
  if (textMode && triggers !== undefined) throw new UsageError('--trigger-hz and --trigger-at apply to binary frames, not --text');
  const motion = motionOf(values, 'constant', null);

  let emulator;
  try {
    emulator = createFrameEmulator({
      rateHz,
      samplesPerFrame,
      axes,
      motion,
      wavelengthM,
      fold,
      refractiveIndex,
      ellipse: ellipseOf(values),
      outputs,
      ...(outputs === 2 ? {} : { power: { modulation: powerModulation ?? 0, frequencyHz: powerFrequencyHz ?? 10 } }),
      noiseRms: noiseOf(values),
      seed,
      includeRate: values['include-rate'] === true,
      startSequence,
      text: textMode,
      faults,
      ...(triggers === undefined ? {} : { triggers }),
    });
  } catch (error) {
    // The core names the option it refused (e.g. distanceM); on the command line that is a usage error.
    throw new UsageError((error as Error).message);
  }
  const quiet = values.quiet === true;
  const framesPerSecond = rateHz / samplesPerFrame;
  const totalFrames = durationS === undefined ? Number.POSITIVE_INFINITY : Math.ceil((durationS * rateHz) / samplesPerFrame);
  const bytesPerSecond = framesPerSecond * (textMode ? 14 * axes * samplesPerFrame : emulator.frameBytes);
  if (!quiet && outputs !== 2) process.stderr.write(`note: ${outputs} detector outputs per axis (invented, docs/live.md); listen needs a calibration of them\n`);
  if (!quiet && bytesPerSecond > baudRate / 10) {
    process.stderr.write(
      `note: about ${Math.round(bytesPerSecond)} bytes/s is more than ${baudRate} Bd carries (about ${baudRate / 10} bytes/s with 8N1); ` +
        'a pseudo-terminal passes it, a real UART would not\n',
    );
  }
  const unambiguousMS = (wavelengthM * rateHz) / (2 * fold * refractiveIndex);
  if (!quiet && emulator.peakSpeedMS * axes > unambiguousMS / 2) {
    process.stderr.write(
      `note: peak speed ${(emulator.peakSpeedMS * axes).toPrecision(4)} m/s is above a quarter fringe per sample ` +
        `(${(unambiguousMS / 2).toPrecision(4)} m/s): the receiver will raise overspeed or lose count\n`,
    );
  }

  const serial = await openPort(port, baudRate);
  let portFailure: Error | null = null;
  serial.on('error', (error) => (portFailure ??= new Error(`${port}: ${error.message}`)));
  serial.on('close', (error?: Error & { disconnected?: boolean }) => {
    if (error?.disconnected) portFailure ??= new Error(`${port}: the device vanished (disconnected)`);
  });
  let stopped: string | null = null;
  // A write the port does not take (nothing reads it) must not keep emulate from a signal or forever.
  let wake: () => void = () => undefined;
  const stopping = new Promise<'stopped'>((resolve) => (wake = () => resolve('stopped')));
  const stop = (signal: NodeJS.Signals) => {
    stopped = signal;
    wake();
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);

  let truth: CaptureWriter | null = null;
  const pauses: { afterFrame: number; ms: number }[] = [];
  let lastPositionM = 0;
  try {
    if (values.truth !== undefined) {
      truth = await createCaptureWriter(values.truth, {
        format: 'csv',
        rateHz,
        channelNames: ['position_m', 'phase_rad'],
        timeColumn: true,
        metadata: { scenario: `invented test scenario: ${motion.kind} motion (fringetally emulate)`, truth_of: port },
      });
    }
    /** Resolves when the port took the bytes, or when a signal came; rejects when it took nothing for STALL_MS. */
    const settle = async (what: string, start: (done: (error: Error | null | undefined) => void) => void): Promise<void> => {
      let timer: ReturnType<typeof setTimeout> | undefined;
      const taken = new Promise<void>((resolve, reject) => start((error) => (error ? reject(new Error(`${port}: ${what} failed (${error.message})`)) : resolve())));
      const stalled = new Promise<never>((_, reject) => {
        timer = setTimeout(() => reject(new Error(`${port}: nothing has read the port for ${STALL_MS / 1000} s (is the receiver still running?)`)), STALL_MS);
      });
      try {
        await Promise.race([taken, stalled, stopping]);
      } finally {
        clearTimeout(timer);
      }
    };
    // Waiting for the callback lets the emulator reuse its buffer for the next batch.
    const write = (bytes: Uint8Array) => settle('write', (done) => serial.write(bytes, done));
    const maxBatchFrames = Math.max(1, Math.floor(65536 / Math.max(emulator.frameBytes, 14 * axes * samplesPerFrame)));
    let clockStartMs = performance.now();
    let made = 0;
    while (stopped === null && made < totalFrames) {
      if (portFailure !== null) throw portFailure;
      const elapsedMs = performance.now() - clockStartMs;
      const due = Math.min(totalFrames, Math.floor((elapsedMs * framesPerSecond) / 1000) + 1);
      let count = Math.min(due - made, maxBatchFrames);
      if (count <= 0) {
        await sleep(Math.max(1, (made * 1000) / framesPerSecond - elapsedMs));
        continue;
      }
      if (pauseEvery > 0) count = Math.min(count, (Math.floor(made / pauseEvery) + 1) * pauseEvery - made);
      const batch = emulator.next(count);
      if (batch.bytes.length > 0) await write(batch.bytes);
      if (truth !== null) await truth.write(batch.positionM, batch.phaseRad, batch.samples);
      lastPositionM = batch.positionM[batch.samples - 1]!;
      made += count;
      if (pauseEvery > 0 && made % pauseEvery === 0 && made < totalFrames) {
        const pauseStart = performance.now();
        await Promise.race([sleep(pauseMs), stopping]);
        const pausedMs = performance.now() - pauseStart;
        pauses.push({ afterFrame: made - 1, ms: pausedMs });
        // The pace restarts after the pause: the samples are late, not lost.
        clockStartMs += pausedMs;
      }
    }
    if (portFailure !== null) throw portFailure;
    await settle('drain', (done) => serial.drain(done));
    await truth?.close();
  } catch (error) {
    await truth?.abort();
    throw error;
  } finally {
    process.off('SIGINT', stop);
    process.off('SIGTERM', stop);
    // A close behind a write nobody takes may never call back: it is not waited for beyond a moment.
    if (serial.isOpen) await Promise.race([new Promise<void>((resolve) => serial.close(() => resolve())), sleep(200)]);
  }

  const log = emulator.log;
  const summary = {
    port,
    rateHz,
    samplesPerFrame,
    axes,
    outputs,
    text: textMode,
    startSequence,
    framesMade: log.framesMade,
    framesSent: log.framesSent,
    samplesMade: log.samplesMade,
    edgesMade: log.edgesMade,
    bytesWritten: log.bytesMade,
    finalPositionM: lastPositionM,
    stoppedBy: stopped ?? 'duration',
    dropped: log.dropped,
    corrupted: log.corrupted,
    garbage: log.garbage,
    pauses,
  };
  if (values.summary !== undefined) await writeFile(values.summary, JSON.stringify(summary, null, 2) + '\n');
  if (!quiet) {
    process.stderr.write(
      `sent ${log.framesSent} of ${log.framesMade} frames (${log.samplesMade} samples at ${rateHz} Hz, ${log.bytesMade} bytes) to ${port}; ` +
        `final position ${(lastPositionM * 1e6).toFixed(6)} µm (axis 0, invented scenario)\n` +
        (log.edgesMade > 0 ? `trigger edges: ${log.edgesMade}\n` : '') +
        `faults: ${log.garbage.length} garbage insertions, ${log.dropped.length} dropped, ${log.corrupted.length} corrupted, ${pauses.length} pauses\n`,
    );
  }
  return 0;
}

/** The trigger options, checked: positive rate, positive increasing times, at most 256 edges in any frame. */
function triggersOf(rateText: string | undefined, timesText: string | undefined, rateHz: number, samplesPerFrame: number): TriggerEdges | undefined {
  if (rateText === undefined && timesText === undefined) return undefined;
  const triggerHz = numberOption('trigger-hz', rateText);
  if (triggerHz !== undefined && !(triggerHz > 0 && Number.isFinite(triggerHz))) throw new UsageError(`--trigger-hz must be positive (got ${rateText})`);
  // More than one edge per sample period cannot be told apart by the interpolation anyway.
  if (triggerHz !== undefined && Math.ceil((triggerHz * samplesPerFrame) / rateHz) + 1 > WIRE_MAX_EDGES_PER_FRAME) {
    throw new UsageError(`--trigger-hz ${triggerHz} puts more than ${WIRE_MAX_EDGES_PER_FRAME} edges into a frame of ${samplesPerFrame} samples at ${rateHz} Hz: lower it or --samples-per-frame`);
  }
  const timesS = timesText?.split(',').map((item) => {
    const value = Number(item.trim());
    if (item.trim() === '' || !(value > 0 && Number.isFinite(value))) throw new UsageError(`--trigger-at takes positive times in seconds, comma-separated (got "${item}")`);
    return value;
  });
  if (timesS !== undefined) {
    timesS.forEach((t, i) => {
      if (i > 0 && !(t > timesS[i - 1]!)) throw new UsageError(`--trigger-at times must increase (${t} s follows ${timesS[i - 1]} s)`);
    });
    const perFrame = new Map<number, number>();
    for (const t of timesS) {
      const frame = Math.floor(Math.ceil(t * rateHz) / samplesPerFrame);
      perFrame.set(frame, (perFrame.get(frame) ?? 0) + 1);
    }
    if (Math.max(...perFrame.values()) + (triggerHz === undefined ? 0 : Math.ceil((triggerHz * samplesPerFrame) / rateHz) + 1) > WIRE_MAX_EDGES_PER_FRAME) {
      throw new UsageError(`--trigger-at puts more than ${WIRE_MAX_EDGES_PER_FRAME} edges into one frame of ${samplesPerFrame} samples`);
    }
  }
  return { ...(triggerHz === undefined ? {} : { rateHz: triggerHz }), ...(timesS === undefined ? {} : { timesS }) };
}

export const emulate: Command = { name: 'emulate', summary: 'a virtual ADC: write wire frames of an invented motion to a serial port', help, run };
