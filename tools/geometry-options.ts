// The geometry options of parallel axes (beam places, point of interest, model, uncertainties) and the angle rows
// written beside their positions: shared by `fringetally angles` (recorded positions) and `listen` (live axes).
import { alarmText, createAxisGeometry, type AngleModel, type AxisGeometry, type AxisGeometryOptions, type AxisGeometryOutput, type BeamPlacement } from '../src/core/index.js';
import { openFileSink, openStreamSink, type OutputSink } from '../src/io/capture/index.js';
import { numberOption, UsageError } from './cli-kit.js';

export const geometryOptionSpecs = {
  beam: { type: 'string', multiple: true },
  point: { type: 'string' },
  model: { type: 'string' },
  'u-reading-nm': { type: 'string' },
  'u-beam-mm': { type: 'string' },
  'u-point-mm': { type: 'string' },
} as const;

export const geometryOptionHelp = `Geometry (mm, in the plane across the motion, one --beam per axis, in axis order):
  --beam X,Y             lateral place of the beam of this axis, mm
  --point X,Y[,Z]        point of interest, mm (Z along the motion from the mirror plane; default 0,0,0)
  --model M              exact (rigid body, default) or small-angle
Uncertainties (standard, inputs uncorrelated; default 0):
  --u-reading-nm U       of each axis reading, nm
  --u-beam-mm U          of each beam's lateral place, mm
  --u-point-mm U         of each coordinate of the point of interest, mm`;

/** The angle columns after the positions, and what they hold. */
export const ANGLE_COLUMNS = ['yaw_rad', 'pitch_rad', 'point_m', 'u_yaw_rad', 'u_pitch_rad', 'u_point_m'] as const;

type Values = { readonly [K in keyof typeof geometryOptionSpecs]?: (typeof geometryOptionSpecs)[K] extends { multiple: true } ? string[] : string };

function coordinates(flag: string, text: string, min: number, max: number): number[] {
  const values = text.split(',').map((part) => (part.trim() === '' ? Number.NaN : Number(part)));
  if (values.length < min || values.length > max || values.some((v) => !Number.isFinite(v))) {
    throw new UsageError(`--${flag} expects ${min === max ? min : `${min} or ${max}`} numbers in mm separated by commas (got "${text}")`);
  }
  return values;
}

/** True when any geometry option is given. */
export function hasGeometry(values: Values): boolean {
  return (values.beam?.length ?? 0) > 0 || Object.keys(geometryOptionSpecs).some((name) => name !== 'beam' && values[name as keyof Values] !== undefined);
}

/**
 * The geometry of `axisCount` axes from the options, checked (one --beam per axis, places that measure an angle):
 * its options (for the library and the feed) and the solver. Usage errors name the option.
 */
export function geometryOf(values: Values, axisCount: number, what: string): { options: AxisGeometryOptions; geometry: AxisGeometry } {
  const beamTexts = values.beam ?? [];
  if (beamTexts.length !== axisCount) throw new UsageError(`give one --beam X,Y per ${what} (${axisCount} ${what === 'axis' ? 'axes' : `${what}s`}, ${beamTexts.length} --beam)`);
  // Absent: the library's default model.
  const model = values.model;
  if (model !== undefined && model !== 'exact' && model !== 'small-angle') throw new UsageError(`--model must be exact or small-angle (got "${model}")`);
  const uncertainty = (flag: 'u-reading-nm' | 'u-beam-mm' | 'u-point-mm', scale: number) => {
    const value = numberOption(flag, values[flag]) ?? 0;
    if (value < 0) throw new UsageError(`--${flag} must not be negative (got ${value})`);
    return value * scale;
  };
  const uReading = uncertainty('u-reading-nm', 1e-9);
  const uBeam = uncertainty('u-beam-mm', 1e-3);
  const uPoint = uncertainty('u-point-mm', 1e-3);
  const beams: BeamPlacement[] = beamTexts.map((text) => {
    const [x, y] = coordinates('beam', text, 2, 2) as [number, number];
    return { xM: x * 1e-3, yM: y * 1e-3, readingUncertaintyM: uReading, placementUncertaintyM: uBeam };
  });
  const [px, py, pz] = values.point === undefined ? [0, 0, 0] : coordinates('point', values.point, 2, 3);
  const options: AxisGeometryOptions = { beams, pointOfInterest: { xM: px! * 1e-3, yM: py! * 1e-3, zM: (pz ?? 0) * 1e-3, uncertaintyM: uPoint }, ...(model === undefined ? {} : { model: model as AngleModel }) };
  try {
    return { options, geometry: createAxisGeometry(options) };
  } catch (error) {
    throw new UsageError(`--beam: ${(error as Error).message}`);
  }
}

const cell = (value: number, digits: number) => (Number.isFinite(value) ? value.toFixed(digits) : '');

/** The angle cells of one row (after its positions): angles to 1e-12 rad, the point to 1 pm, uncertainties finer; empty when not measured. */
export function angleCells(out: Float64Array): string {
  return `${cell(out[0]!, 12)},${cell(out[1]!, 12)},${cell(out[2]!, 12)},${cell(out[3]!, 15)},${cell(out[4]!, 15)},${cell(out[5]!, 15)}`;
}

/** What the geometry says it measures, for a log line. */
export function measuredText(geometry: AxisGeometry): string {
  const { yaw, pitch } = geometry.measures;
  return `${yaw ? 'yaw' : ''}${yaw && pitch ? ' and ' : ''}${pitch ? 'pitch' : ''}`;
}

/** Positions of every axis for one block, copied for the row writer. */
export interface AngleRowBlock {
  readonly firstIndex: number;
  readonly length: number;
  readonly rateHz: number;
  /** positionM[k][i]: axis k, sample i, m. */
  readonly positionM: readonly Float64Array[];
  /** Alarm bits of every axis, OR-ed per sample. */
  readonly flags: Uint8Array;
}

export interface AngleRowWriter {
  readonly path: string;
  readonly rowsWritten: number;
  write(block: AngleRowBlock): Promise<void>;
  close(): Promise<void>;
  abort(): Promise<void>;
}

/**
 * CSV rows of several axes with the geometry solved per sample (the library's `createAxisGeometry`): t, the
 * positions, the angle columns and the alarms of all axes; the rows whose absolute index is a multiple of `every`.
 * The sink is a temporary file renamed at close, or standard output.
 */
export async function createAngleRowWriter(path: string, options: { readonly geometry: AxisGeometry; readonly every: number; readonly stdout?: NodeJS.WritableStream }): Promise<AngleRowWriter> {
  const { geometry, every } = options;
  const axisCount = geometry.beams;
  const sink: OutputSink = path === '-' ? openStreamSink(options.stdout ?? process.stdout) : await openFileSink(path);
  let header = ['t', ...Array.from({ length: axisCount }, (_, k) => `position_m_${k + 1}`), ...ANGLE_COLUMNS, 'alarms'].join(',') + '\n';
  let rowsWritten = 0;
  let capacity = 0;
  let solved: Record<keyof AxisGeometryOutput, Float64Array> | null = null;
  const out = new Float64Array(6);
  return {
    path,
    get rowsWritten() {
      return rowsWritten;
    },
    async write(block) {
      const n = block.length;
      if (n > capacity || solved === null) {
        capacity = Math.max(n, 1024);
        solved = { yawRad: new Float64Array(capacity), pitchRad: new Float64Array(capacity), pointM: new Float64Array(capacity), yawUncertaintyRad: new Float64Array(capacity), pitchUncertaintyRad: new Float64Array(capacity), pointUncertaintyM: new Float64Array(capacity) };
      }
      geometry.process(block.positionM, solved, n);
      let text = header;
      header = '';
      const firstRow = Math.ceil(block.firstIndex / every) * every - block.firstIndex;
      for (let i = firstRow; i < n; i += every) {
        out[0] = solved.yawRad[i]!;
        out[1] = solved.pitchRad[i]!;
        out[2] = solved.pointM[i]!;
        out[3] = solved.yawUncertaintyRad[i]!;
        out[4] = solved.pitchUncertaintyRad[i]!;
        out[5] = solved.pointUncertaintyM[i]!;
        let positions = '';
        for (let k = 0; k < axisCount; k++) positions += `${block.positionM[k]![i]!.toFixed(12)},`;
        text += `${((block.firstIndex + i) / block.rateHz).toFixed(9)},${positions}${angleCells(out)},${alarmText(block.flags[i]!)}\n`;
        rowsWritten++;
      }
      if (text !== '') {
        const bytes = Buffer.from(text);
        await sink.write(bytes, bytes.length);
      }
    },
    async close() {
      if (header !== '') {
        const bytes = Buffer.from(header);
        header = '';
        await sink.write(bytes, bytes.length);
      }
      await sink.commit();
    },
    abort: () => sink.discard(),
  };
}
