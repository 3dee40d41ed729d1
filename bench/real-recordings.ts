// Accuracy on real recordings (issue 10 §1, §5, §6): the DC outputs of two three-output interferometers (MIT
// licence, provenance in ../shared/realdata/PROVENANCE.md; never copied into the project). Skipped with a note when
// the folder is absent, as on a user's clone.
//
// Reference, independent of the library's fit: batch alternating least squares (ml-matrix) of the three-output
// model I_k = P(t)·(o_k + a_k·cos(φ − θ_k)) over the stored samples, with the source power constrained to a
// Legendre polynomial of degree 8 in time (slow drift, no fringe-rate content), started from the symmetric 120°
// formula on each output's own min/max normalisation; its phase is the per-sample least-squares solution of
// M·(P, P cos φ, P sin φ) = I. Every method is scored by the peak-to-peak of its position minus the reference's.

import { existsSync, readFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { Matrix, pseudoInverse, solve } from 'ml-matrix';
import {
  channelParametersOf,
  createChannelCombiner,
  createChannelMomentAccumulator,
  createCorrection,
  createEllipseAccumulator,
  createEllipseFit,
  createOnlineCorrection,
  normaliseChannels,
  wrapPhase,
  type EllipseCalibration,
  type EllipseFitMethod,
} from '../src/core/index.js';

/** He-Ne vacuum wavelength (CIPM 2007) and fold 2, as the figures use. */
const NM_PER_RAD = 632.9908 / (2 * 2 * Math.PI);
/** Memories (samples) of the online correction tried: about 1.5, 3 and 10 fringes of these recordings' slow motion. */
const ONLINE_MEMORIES = [500, 1000, 4000] as const;
const RECORDINGS = [
  { name: 'MMI', file: 'mpti_mmi_dc.csv' },
  { name: 'FS', file: 'mpti_fs_dc.csv' },
] as const;

export interface RecordingFigures {
  readonly name: string;
  readonly samples: number;
  /** Travel covered, fringes (max − min of the reference phase / 2π). */
  readonly rangeFringes: number;
  /** Source power of the reference: (max − min) / mean. */
  readonly powerSwing: number;
  /** Peak-to-peak disagreement with the reference, nm (He-Ne, fold 2), per method. */
  readonly disagreementNm: Record<string, number>;
}

export interface RealRecordingsResult {
  readonly folder: string | null;
  readonly note: string;
  readonly recordings: RecordingFigures[];
}

/** ../shared/realdata beside the checkout, or FRINGETALLY_REALDATA. */
export function realDataFolder(): string | null {
  const candidates = [process.env.FRINGETALLY_REALDATA, resolve('..', 'shared', 'realdata')].filter((path): path is string => path !== undefined);
  return candidates.find((path) => existsSync(join(path, RECORDINGS[0].file))) ?? null;
}

function readOutputs(path: string): Float64Array[] {
  const rows = readFileSync(path, 'utf8')
    .split('\n')
    .filter((line) => /^[-0-9.]/.test(line))
    .map((line) => line.split(',').map(Number));
  return [0, 1, 2].map((k) => Float64Array.from(rows, (row) => row[k]!));
}

function unwrapped(phase: ArrayLike<number>): Float64Array {
  const out = new Float64Array(phase.length);
  out[0] = phase[0]!;
  for (let i = 1; i < phase.length; i++) out[i] = out[i - 1]! + wrapPhase(phase[i]! - phase[i - 1]!);
  return out;
}

/** Peak-to-peak, nm, of a phase series against the reference, after matching the sense and removing the mean. */
function disagreementNm(phase: ArrayLike<number>, reference: Float64Array): number {
  const path = unwrapped(phase);
  const n = reference.length;
  const sense = Math.sign((path[n - 1]! - path[0]!) * (reference[n - 1]! - reference[0]!)) || 1;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += sense * path[i]! - reference[i]!;
  mean /= n;
  let low = Infinity;
  let high = -Infinity;
  for (let i = 0; i < n; i++) {
    const d = sense * path[i]! - reference[i]! - mean;
    low = Math.min(low, d);
    high = Math.max(high, d);
  }
  return (high - low) * NM_PER_RAD;
}

function legendreBasis(n: number, degree: number): Matrix {
  const basis = new Matrix(n, degree + 1);
  for (let i = 0; i < n; i++) {
    const t = (2 * i) / (n - 1) - 1;
    let previous = 1;
    let current = t;
    basis.set(i, 0, 1);
    if (degree > 0) basis.set(i, 1, t);
    for (let d = 2; d <= degree; d++) {
      const next = ((2 * d - 1) * t * current - (d - 1) * previous) / d;
      basis.set(i, d, next);
      previous = current;
      current = next;
    }
  }
  return basis;
}

/** The reference phase (unwrapped) and power; see the file comment. */
function referencePhase(outputs: Float64Array[]): { phase: Float64Array; power: Float64Array } {
  const n = outputs[0]!.length;
  const data = new Matrix(outputs.map((output) => Array.from(output))).transpose(); // n × 3
  const normalised = outputs.map((output) => {
    let low = Infinity;
    let high = -Infinity;
    for (const value of output) {
      low = Math.min(low, value);
      high = Math.max(high, value);
    }
    return Float64Array.from(output, (value) => (2 * value - high - low) / (high - low));
  });
  let phase = Float64Array.from({ length: n }, (_, i) =>
    Math.atan2(Math.sqrt(3) * (normalised[1]![i]! - normalised[2]![i]!), 2 * normalised[0]![i]! - normalised[1]![i]! - normalised[2]![i]!),
  );
  let power = new Float64Array(n).fill(1);
  const basis = legendreBasis(n, 8);
  const smoother = pseudoInverse(basis);
  for (let iteration = 0; iteration < 40; iteration++) {
    const design = new Matrix(n, 3);
    for (let i = 0; i < n; i++) {
      design.set(i, 0, power[i]!);
      design.set(i, 1, power[i]! * Math.cos(phase[i]!));
      design.set(i, 2, power[i]! * Math.sin(phase[i]!));
    }
    const model = solve(design, data).transpose(); // 3 × 3: row k = (o_k, a_k cos θ_k, a_k sin θ_k)
    const z = pseudoInverse(model).mmul(data.transpose()); // 3 × n
    const raw = Matrix.columnVector(z.getRow(0));
    const smooth = basis.mmul(smoother.mmul(raw));
    const mean = smooth.mean();
    power = Float64Array.from(smooth.getColumn(0), (p) => p / mean);
    phase = Float64Array.from({ length: n }, (_, i) => Math.atan2(z.get(2, i), z.get(1, i)));
  }
  return { phase: unwrapped(phase), power };
}

function pairPhase(x: Float64Array, y: Float64Array, method: EllipseFitMethod): Float64Array | null {
  const accumulator = createEllipseAccumulator({ maxPhaseErrorRad: 1.55, maxAmplitudeRatio: 10, minCoverage: 0 });
  accumulator.add(x, y, x.length);
  const fit = createEllipseFit({ method, maxPhaseErrorRad: 1.55, maxAmplitudeRatio: 10, minCoverage: 0 }).solve(accumulator);
  if (!fit.ok) return null;
  return correctedPhase(fit.calibration, x, y);
}

function correctedPhase(calibration: EllipseCalibration, x: Float64Array, y: Float64Array): Float64Array {
  const n = x.length;
  const u = new Float64Array(n);
  const v = new Float64Array(n);
  createCorrection({ calibration }).process(x, y, u, v, n);
  return Float64Array.from(u, (ui, i) => Math.atan2(v[i]!, ui));
}

/**
 * The online correction over a pair, started from the batch fit of the whole recording (as after calibrate), with
 * memory `forgettingSamples`; null when that fit fails. Also returns how many updates it took.
 */
function onlinePhase(x: Float64Array, y: Float64Array, forgettingSamples: number): { phase: Float64Array; updates: number } | null {
  const accumulator = createEllipseAccumulator({ maxPhaseErrorRad: 1.55, minCoverage: 0 });
  accumulator.add(x, y, x.length);
  const start = createEllipseFit({ method: 'hyper', maxPhaseErrorRad: 1.55, minCoverage: 0 }).solve(accumulator);
  if (!start.ok) return null;
  const n = x.length;
  const u = new Float64Array(n);
  const v = new Float64Array(n);
  const stage = createOnlineCorrection({ calibration: start.calibration, forgettingSamples, updateIntervalSamples: 64, blendSamples: 64, minCoverage: 0.75 });
  stage.process(x, y, u, v, n);
  return { phase: Float64Array.from(u, (ui, i) => Math.atan2(v[i]!, ui)), updates: stage.status.updates };
}

function runRecording(name: string, outputs: Float64Array[]): RecordingFigures {
  const n = outputs[0]!.length;
  const reference = referencePhase(outputs);
  const figures: Record<string, number> = {};
  // Two outputs at a time, as the two-output path sees them: classic and bias-reduced fits, batch and online.
  for (const [a, b] of [[0, 1], [0, 2], [1, 2]] as const) {
    for (const method of ['heydemann', 'hyper'] as const) {
      const phase = pairPhase(outputs[a]!, outputs[b]!, method);
      if (phase !== null) figures[`pair ${a + 1}${b + 1} ${method === 'heydemann' ? 'classic' : 'bias-reduced'}`] = disagreementNm(phase, reference.phase);
    }
    for (const memory of ONLINE_MEMORIES) {
      const online = onlinePhase(outputs[a]!, outputs[b]!, memory);
      if (online !== null) figures[`pair ${a + 1}${b + 1} online ${memory} (${online.updates} updates)`] = disagreementNm(online.phase, reference.phase);
    }
  }
  // All three outputs: power normalisation, then the ellipse of the normalised pair by each method.
  const moments = createChannelMomentAccumulator({ channelCount: 3 });
  moments.add(outputs, n);
  const normalisation = moments.solve();
  if (!normalisation.ok) throw new Error(`${name}: ${normalisation.message}`);
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  normaliseChannels(normalisation.normalisation, outputs, n, x, y, new Float64Array(n));
  for (const method of ['heydemann', 'hyper'] as const) {
    const accumulator = createEllipseAccumulator({ minCoverage: 0 });
    accumulator.add(x, y, n);
    const fit = createEllipseFit({ method, minCoverage: 0 }).solve(accumulator);
    if (!fit.ok) throw new Error(`${name}: three-output ${method} fit: ${fit.message}`);
    const layout = channelParametersOf(normalisation.normalisation, fit.calibration);
    const u = new Float64Array(n);
    const v = new Float64Array(n);
    createChannelCombiner({ channels: layout, adc: { kind: 'float', fullScale: 1e9 } }).process(outputs, n, u, v, new Float32Array(n), new Uint8Array(n), 0, []);
    figures[`three outputs ${method === 'heydemann' ? 'classic' : 'bias-reduced'}`] = disagreementNm(
      Float64Array.from(u, (ui, i) => Math.atan2(v[i]!, ui)),
      reference.phase,
    );
  }
  for (const memory of ONLINE_MEMORIES) {
    const online = onlinePhase(x, y, memory);
    if (online !== null) figures[`three outputs online ${memory} (${online.updates} updates)`] = disagreementNm(online.phase, reference.phase);
  }
  let low = Infinity;
  let high = -Infinity;
  for (const p of reference.power) {
    low = Math.min(low, p);
    high = Math.max(high, p);
  }
  let phaseLow = Infinity;
  let phaseHigh = -Infinity;
  for (const p of reference.phase) {
    phaseLow = Math.min(phaseLow, p);
    phaseHigh = Math.max(phaseHigh, p);
  }
  return { name, samples: n, rangeFringes: (phaseHigh - phaseLow) / (2 * Math.PI), powerSwing: high - low, disagreementNm: figures };
}

export function runRealRecordings(): RealRecordingsResult {
  const folder = realDataFolder();
  if (folder === null) {
    return { folder: null, note: 'real recordings skipped: ../shared/realdata not found (set FRINGETALLY_REALDATA to its folder)', recordings: [] };
  }
  return {
    folder,
    note: 'reference: batch alternating least squares (ml-matrix) of the three-output model with a smooth source power',
    recordings: RECORDINGS.map((recording) => runRecording(recording.name, readOutputs(join(folder, recording.file)))),
  };
}

export function formatRealRecordings(result: RealRecordingsResult): string {
  if (result.folder === null) return result.note;
  const lines = [`real three-output recordings (${result.folder}); ${result.note}; p-p disagreement in nm (633 nm, fold 2)`];
  for (const recording of result.recordings) {
    lines.push(
      `  ${recording.name}: ${recording.samples} samples, ${recording.rangeFringes.toFixed(1)} fringes of range, source power swing ${(recording.powerSwing * 100).toFixed(1)} %`,
    );
    for (const [label, value] of Object.entries(recording.disagreementNm)) lines.push(`    ${label.padEnd(40)} ${value.toFixed(3).padStart(8)} nm`);
  }
  return lines.join('\n');
}
