// A virtual ADC: an invented motion through imperfect quadrature detectors, encoded as wire frames (or text
// lines) batch by batch, with injected transport faults. Used by `fringetally emulate` and the live benchmarks.

import {
  createMotionProfile,
  createQuadratureSynthesizer,
  createRandom,
  type ChannelParameters,
  type EllipseCalibration,
  type MotionSpec,
  type QuadratureSynthesizer,
} from '../../src/core/index.js';
import {
  encodeWireFrame,
  formatSampleLines,
  wireFrameLength,
  WireEdgeLine,
  WireFlag,
  WIRE_EDGE_BYTES,
  WIRE_EDGE_LEAD_UNITS,
  WIRE_SEQUENCE_MODULUS,
  type WireEdge,
} from '../../src/io/wire/index.js';

/**
 * The detector outputs emulated for three and four outputs per axis (invented, unequal on purpose), in ADC counts
 * at the mean source power: I_k = P·(offset + amplitude·cos(φ − phaseRad)), DC-coupled (every output positive).
 * Three outputs 120° apart (a 3×3 coupler), four at 0/90/180/270° (two balanced pairs).
 */
export const EMULATED_OUTPUTS: Readonly<Record<3 | 4, readonly ChannelParameters[]>> = {
  3: [
    { offset: 12000, amplitude: 10000, phaseRad: 0 },
    { offset: 11500, amplitude: 9500, phaseRad: (2 * Math.PI) / 3 },
    { offset: 12500, amplitude: 10500, phaseRad: (4 * Math.PI) / 3 },
  ],
  4: [
    { offset: 12000, amplitude: 10000, phaseRad: 0 },
    { offset: 11800, amplitude: 9800, phaseRad: Math.PI / 2 },
    { offset: 12200, amplitude: 10200, phaseRad: Math.PI },
    { offset: 11900, amplitude: 9900, phaseRad: (3 * Math.PI) / 2 },
  ],
};

/** The source power factor P(t) = 1 + modulation·sin(2π·frequencyHz·t) of three- and four-output detectors. */
export interface SourcePower {
  /** Relative amplitude of the power's variation, 0..0.5. */
  readonly modulation: number;
  readonly frequencyHz: number;
}

/** Rising edges on the trigger input (line 0), sent in version 2 frames: at a steady rate and/or at given times. */
export interface TriggerEdges {
  /** Edges at t = j / rateHz, j = 1, 2, …; Hz. */
  readonly rateHz?: number;
  /** Edges at these times from the first sample, s, increasing. */
  readonly timesS?: readonly number[];
}

export interface FrameFaults {
  /** Random bytes before every Nth frame (frames N, 2N, …; 0-based count of frames made); 0: never. */
  readonly garbageEvery: number;
  /** Bytes of each garbage insertion. */
  readonly garbageBytes: number;
  /** Frames N−1, 2N−1, … are made (their sequence number is used) but not sent; 0: never. */
  readonly dropEvery: number;
  /** Frames N−1, 2N−1, … get one payload byte inverted, so their CRC fails; 0: never. Dropping wins over corrupting. */
  readonly corruptEvery: number;
}

export interface FrameEmulatorOptions {
  readonly rateHz: number;
  readonly samplesPerFrame: number;
  /** Axes per frame; axis k carries the motion scaled by k + 1 (invented, so that axes differ). */
  readonly axes: number;
  readonly motion: MotionSpec;
  readonly wavelengthM: number;
  readonly fold: number;
  readonly refractiveIndex: number;
  /** Detector ellipse in ADC counts (two outputs per axis). */
  readonly ellipse: EllipseCalibration;
  /** Detector outputs per axis: 2 (the ellipse), or 3 or 4 (`EMULATED_OUTPUTS`, sent with a channel layout). Default 2. */
  readonly outputs?: 2 | 3 | 4;
  /** Three or four outputs: the source power's variation. Default constant (P = 1). */
  readonly power?: SourcePower;
  /** Gaussian noise per channel, counts RMS. */
  readonly noiseRms: number;
  readonly seed: number;
  /** Write the sample-rate field in every frame. */
  readonly includeRate: boolean;
  /** Sequence number of the first frame, 0..65535. */
  readonly startSequence: number;
  /** `text`: `x0,y0,…` lines instead of frames (faults must all be 0). */
  readonly text: boolean;
  readonly faults: FrameFaults;
  /** Trigger edges, timed to 2^-16 sample period (binary frames only); none when absent. */
  readonly triggers?: TriggerEdges;
}

/** What was done to the stream so far; frame numbers count frames made, from 0. */
export interface EmulatorLog {
  framesMade: number;
  framesSent: number;
  samplesMade: number;
  /** Trigger edges put into frames made (sent or not). */
  edgesMade: number;
  bytesMade: number;
  readonly dropped: number[];
  readonly corrupted: number[];
  readonly garbage: { beforeFrame: number; bytes: number }[];
}

export interface FrameBatch {
  /** The bytes to send; a view of an internal buffer, valid until the next call. */
  readonly bytes: Uint8Array;
  /** Truth of axis 0 for the batch's samples: position (m) and phase (rad). */
  readonly positionM: Float64Array;
  readonly phaseRad: Float64Array;
  /** Samples made (frames × samplesPerFrame), sent or not. */
  readonly samples: number;
  readonly firstSample: number;
}

export interface FrameEmulator {
  /** Makes the next `frames` frames. */
  next(frames: number): FrameBatch;
  /** Bytes of one frame as made (no faults). */
  readonly frameBytes: number;
  readonly log: Readonly<EmulatorLog>;
  readonly peakSpeedMS: number;
}

export function createFrameEmulator(options: FrameEmulatorOptions): FrameEmulator {
  const { rateHz, samplesPerFrame, axes, faults } = options;
  const outputs = options.outputs ?? 2;
  const channelCount = outputs * axes;
  const layout = outputs === 2 ? undefined : Array.from({ length: axes }, () => outputs);
  const profile = createMotionProfile(options.motion, rateHz);
  const radPerMetre = (2 * Math.PI * options.fold * options.refractiveIndex) / options.wavelengthM;
  const synthesizers: QuadratureSynthesizer[] = Array.from({ length: axes }, (_, k) =>
    createQuadratureSynthesizer({ ellipse: options.ellipse, noiseRms: options.noiseRms, adc: { kind: 'int16' }, seed: options.seed + k }),
  );
  const random = createRandom((options.seed * 7919 + 17) >>> 0);
  const withEdges = options.triggers !== undefined;
  const flags = (options.includeRate ? WireFlag.sampleRate : 0) | (withEdges ? WireFlag.edges : 0) | (layout === undefined ? 0 : WireFlag.channelLayout);
  const frameBytes = options.text ? 0 : wireFrameLength(channelCount, samplesPerFrame, flags);
  const edges = withEdges ? createTriggerClock(options.triggers!, rateHz) : null;
  const header: {
    sequence: number;
    channelCount: number;
    samplesPerFrame: number;
    sampleRateHz: number | undefined;
    edges: WireEdge[] | undefined;
    channelLayout: number[] | undefined;
  } = {
    sequence: options.startSequence,
    channelCount,
    samplesPerFrame,
    sampleRateHz: options.includeRate ? rateHz : undefined,
    edges: withEdges ? [] : undefined,
    channelLayout: layout,
  };
  const detectors = outputs === 2 ? null : createDetectorOutputs(EMULATED_OUTPUTS[outputs], options.power, options.noiseRms, options.seed, rateHz);
  const frameSamples = new Int16Array(channelCount * samplesPerFrame);
  const log: EmulatorLog = { framesMade: 0, framesSent: 0, samplesMade: 0, edgesMade: 0, bytesMade: 0, dropped: [], corrupted: [], garbage: [] };

  let capacityFrames = 0;
  let position = new Float64Array(0);
  let phase = new Float64Array(0);
  let axisPhase = new Float64Array(0);
  let x = new Float64Array(0);
  let y = new Float64Array(0);
  let interleaved = new Int16Array(0);
  let bytes = new Uint8Array(0);

  function reserve(frames: number): void {
    if (frames <= capacityFrames) return;
    capacityFrames = frames;
    const samples = frames * samplesPerFrame;
    position = new Float64Array(samples);
    phase = new Float64Array(samples);
    axisPhase = new Float64Array(samples);
    x = new Float64Array(samples);
    y = new Float64Array(samples);
    interleaved = new Int16Array(samples * channelCount);
    bytes = new Uint8Array(frames * (frameBytes + faults.garbageBytes));
  }

  function isEvery(frame: number, every: number): boolean {
    return every > 0 && (frame + 1) % every === 0;
  }

  function next(frames: number): FrameBatch {
    reserve(frames);
    const firstSample = log.samplesMade;
    const samples = frames * samplesPerFrame;
    profile.process(firstSample, position, samples);
    for (let i = 0; i < samples; i++) phase[i] = position[i]! * radPerMetre;
    for (let k = 0; k < axes; k++) {
      for (let i = 0; i < samples; i++) axisPhase[i] = phase[i]! * (k + 1);
      if (detectors !== null) {
        detectors.process(axisPhase, firstSample, samples, interleaved, outputs * k, channelCount);
        continue;
      }
      synthesizers[k]!.process(axisPhase, x, y, samples);
      for (let i = 0, at = 2 * k; i < samples; i++, at += channelCount) {
        interleaved[at] = x[i]!;
        interleaved[at + 1] = y[i]!;
      }
    }
    let used = 0;
    if (options.text) {
      const lines = formatSampleLines(interleaved, channelCount, samples);
      if (bytes.length < lines.length) bytes = new Uint8Array(lines.length * 2);
      used = Buffer.from(bytes.buffer, bytes.byteOffset, bytes.length).write(lines, 0, 'latin1');
      log.framesMade += frames;
      log.framesSent += frames;
    } else {
      for (let f = 0; f < frames; f++) {
        const frame = log.framesMade;
        if (faults.garbageEvery > 0 && frame > 0 && frame % faults.garbageEvery === 0) {
          for (let b = 0; b < faults.garbageBytes; b++) bytes[used++] = Math.floor(random.uniform() * 256);
          log.garbage.push({ beforeFrame: frame, bytes: faults.garbageBytes });
        }
        const valueCount = frameSamples.length;
        for (let i = 0, from = f * valueCount; i < valueCount; i++, from++) frameSamples[i] = interleaved[from]!;
        if (edges !== null) {
          edges.frame(frame * samplesPerFrame, samplesPerFrame, header.edges!);
          log.edgesMade += header.edges!.length;
          const room = used + frameBytes + header.edges!.length * WIRE_EDGE_BYTES;
          if (room > bytes.length) {
            const grown = new Uint8Array(2 * room + frames * frameBytes);
            grown.set(bytes.subarray(0, used));
            bytes = grown;
          }
        }
        if (isEvery(frame, faults.dropEvery)) {
          log.dropped.push(frame);
        } else {
          const length = encodeWireFrame(header, frameSamples, bytes, used);
          if (isEvery(frame, faults.corruptEvery)) {
            // Invert one payload byte: the header stays valid, so the receiver sees a CRC failure, not garbage.
            const payloadStart = length - 4 - WIRE_EDGE_BYTES * (header.edges?.length ?? 0) - 2 * channelCount * samplesPerFrame;
            bytes[used + payloadStart + Math.floor(random.uniform() * 2 * channelCount * samplesPerFrame)] ^= 0xff;
            log.corrupted.push(frame);
          }
          used += length;
          log.framesSent++;
        }
        header.sequence = (header.sequence + 1) % WIRE_SEQUENCE_MODULUS;
        log.framesMade++;
      }
    }
    log.samplesMade += samples;
    log.bytesMade += used;
    return { bytes: bytes.subarray(0, used), positionM: position, phaseRad: phase, samples, firstSample };
  }

  return { next, frameBytes, log, peakSpeedMS: profile.peakSpeedMS };
}

/**
 * The trigger edges of each frame, in order: an edge at time t is at absolute sample time τ = t·rate, rounded to
 * the wire's 2^-16 period, and goes with the frame holding its first sample at or after it (docs/wire-format.md).
 */
function createTriggerClock(triggers: TriggerEdges, rateHz: number) {
  // Edge times in lead units (2^-16 sample period) from the first sample, merged from both sources as they are needed.
  const units = (tS: number) => Math.round(tS * rateHz * WIRE_EDGE_LEAD_UNITS);
  const times = triggers.timesS ?? [];
  let listAt = 0;
  let nextJ = 1;
  const nextUnits = (): number => {
    const fromList = listAt < times.length ? units(times[listAt]!) : Infinity;
    const fromRate = triggers.rateHz === undefined ? Infinity : units(nextJ / triggers.rateHz);
    return Math.min(fromList, fromRate);
  };
  const advance = (at: number): void => {
    if (listAt < times.length && units(times[listAt]!) === at) listAt++;
    if (triggers.rateHz !== undefined && units(nextJ / triggers.rateHz) === at) nextJ++;
  };
  return {
    /** Fills `out` with the edges whose first following sample lies in [firstSample, firstSample + samples). */
    frame(firstSample: number, samples: number, out: WireEdge[]): void {
      out.length = 0;
      for (;;) {
        const at = nextUnits();
        const sample = Math.ceil(at / WIRE_EDGE_LEAD_UNITS);
        if (!(sample < firstSample + samples)) return;
        advance(at);
        // An edge before the first sample has no sample before it to interpolate from: it is not sent.
        if (sample <= 0) continue;
        out.push({ sample: sample - firstSample, lead: sample * WIRE_EDGE_LEAD_UNITS - at, line: WireEdgeLine.trigger, rising: true });
      }
    },
  };
}

/**
 * Three or four detector outputs per axis: I_k = P(t)·(offset_k + amplitude_k·cos(φ − phaseRad_k)) plus Gaussian
 * noise, rounded to int16 (clamped at full scale), written interleaved from channel `first` with stride `stride`.
 */
function createDetectorOutputs(layout: readonly ChannelParameters[], power: SourcePower | undefined, noiseRms: number, seed: number, rateHz: number) {
  const random = createRandom((seed * 104729 + 3) >>> 0);
  const omega = power === undefined ? 0 : (2 * Math.PI * power.frequencyHz) / rateHz;
  const modulation = power?.modulation ?? 0;
  return {
    process(phase: Float64Array, firstSample: number, samples: number, out: Int16Array, first: number, stride: number): void {
      for (let i = 0, at = first; i < samples; i++, at += stride) {
        const p = 1 + modulation * Math.sin(omega * (firstSample + i));
        for (let k = 0; k < layout.length; k++) {
          const { offset, amplitude, phaseRad } = layout[k]!;
          const value = Math.round(p * (offset + amplitude * Math.cos(phase[i]! - phaseRad)) + noiseRms * random.gaussian());
          out[at + k] = Math.max(-32768, Math.min(32767, value));
        }
      }
    },
  };
}
