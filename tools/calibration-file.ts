// The calibration file: versioned JSON holding the fitted ellipse in the capture's own units (see docs/calibration-format.md).
import { readFile } from 'node:fs/promises';
import { validateCalibration, type EllipseCalibration, type EllipseFitResult } from '../src/core/index.js';
import type { CaptureInfo } from '../src/io/capture/index.js';

export const CALIBRATION_FORMAT = 'fringetally-calibration';
export const CALIBRATION_VERSION = 1;

export interface CalibrationFile extends EllipseCalibration {
  readonly format: typeof CALIBRATION_FORMAT;
  readonly version: typeof CALIBRATION_VERSION;
  /** What the offsets and amplitudes are measured in: "adc-counts" for integer captures, else "capture-units". */
  readonly units: 'adc-counts' | 'capture-units';
  readonly convention: string;
  readonly fit: { readonly samples: number; readonly coverage: number; readonly residualRms: number };
  readonly capture: { readonly file: string; readonly format: string; readonly rateHz: number; readonly sampleEncoding: string };
  readonly createdAt: string;
}

export const CONVENTION = 'x = amplitudeX*cos(phi) + offsetX; y = amplitudeY*sin(phi + phaseErrorRad) + offsetY';

export function calibrationFileOf(fit: Extract<EllipseFitResult, { ok: true }>, info: CaptureInfo): CalibrationFile {
  const integer = info.sampleEncoding === 'int16' || info.sampleEncoding === 'int24' || info.sampleEncoding === 'integer-text';
  return {
    format: CALIBRATION_FORMAT,
    version: CALIBRATION_VERSION,
    ...fit.calibration,
    units: integer ? 'adc-counts' : 'capture-units',
    convention: CONVENTION,
    fit: { samples: fit.samples, coverage: fit.coverage, residualRms: fit.residualRms },
    capture: { file: info.file, format: info.format, rateHz: info.rateHz, sampleEncoding: info.sampleEncoding },
    createdAt: new Date().toISOString(),
  };
}

/** Reads and checks a calibration file; errors name the file and the field. */
export async function readCalibrationFile(path: string): Promise<EllipseCalibration> {
  let parsed: unknown;
  try {
    parsed = JSON.parse(await readFile(path, 'utf8'));
  } catch (error) {
    throw new Error(`${path}: not a readable JSON calibration file (${(error as Error).message})`);
  }
  const record = parsed as Partial<CalibrationFile> | null;
  if (record === null || typeof record !== 'object' || record.format !== CALIBRATION_FORMAT) {
    throw new Error(`${path}: expected "format": "${CALIBRATION_FORMAT}"`);
  }
  if (record.version !== CALIBRATION_VERSION) {
    throw new Error(`${path}: unsupported calibration version ${JSON.stringify(record.version)} (this fringetally reads version ${CALIBRATION_VERSION})`);
  }
  try {
    return validateCalibration(
      {
        offsetX: record.offsetX as number,
        offsetY: record.offsetY as number,
        amplitudeX: record.amplitudeX as number,
        amplitudeY: record.amplitudeY as number,
        phaseErrorRad: record.phaseErrorRad as number,
      },
      'calibration',
    );
  } catch (error) {
    throw new Error(`${path}: ${(error as Error).message}`);
  }
}
