// The calibration file: versioned JSON holding the fitted ellipse, or the layout of 3 or 4 detector outputs, in the
// capture's own units (see docs/calibration-format.md). Version 2 adds the layout; version 1 files still load.
import { readFile } from 'node:fs/promises';
import {
  channelsOfEllipse,
  createHarmonicCorrection,
  ellipseOfChannels,
  validateCalibration,
  validateChannelParameters,
  type ChannelParameters,
  type EllipseCalibration,
  type EllipseFitResult,
  type PhaseHarmonics,
  type ResidualSummary,
} from '../src/core/index.js';
import type { CaptureInfo } from '../src/io/capture/index.js';

export const CALIBRATION_FORMAT = 'fringetally-calibration';
export const CALIBRATION_VERSION = 2;

/** One detector output of the layout: the column or channel it came from and its model parameters. */
export interface CalibrationChannel extends ChannelParameters {
  readonly name: string;
}

export interface CalibrationFile extends Partial<EllipseCalibration> {
  readonly format: typeof CALIBRATION_FORMAT;
  readonly version: typeof CALIBRATION_VERSION;
  /**
   * Every output, in order: I = P·(offset + amplitude·cos(φ − phaseRad)). Two outputs: P = 1 and the ellipse fields
   * above say the same in the two-channel convention; three or four: P is the source power (1 = its mean over the
   * capture), removed sample by sample.
   */
  readonly layout: { readonly model: string; readonly channels: readonly CalibrationChannel[] };
  /** What the offsets and amplitudes are measured in: "adc-counts" for integer captures, else "capture-units". */
  readonly units: 'adc-counts' | 'capture-units';
  readonly convention: string;
  readonly fit: { readonly samples: number; readonly coverage: number; readonly residualRms: number };
  readonly capture: { readonly file: string; readonly format: string; readonly rateHz: number; readonly sampleEncoding: string };
  /** The optional harmonic correction beyond the ellipse (calibrate --harmonics N, docs/calibration-format.md). */
  readonly harmonics?: CalibrationHarmonics;
  /** What the ellipse misses, measured on the calibration capture (docs/calibration-format.md); absent in older files. */
  readonly residual?: CalibrationResidual;
  readonly createdAt: string;
}

/** The `residual` section: field names are a contract (docs/calibration-format.md). NaN is written as null. */
export interface CalibrationResidual {
  /** Amplitudes of the corrected radius's harmonics of orders 1..8 of the phase, relative to the radius. */
  readonly radiusHarmonics: readonly (number | null)[];
  /** Largest minus smallest mean radius over the capture (phase-locked part removed), relative to the radius. */
  readonly radiusDriftRelative: number | null;
  /** Sample-to-sample RMS of the radius, relative, and the spectral slope β of its noise (PSD ∝ f^β; 0 white, −2 red). */
  readonly radiusNoiseRms: number | null;
  readonly noiseSpectralSlope: number | null;
  /** Mean corrected radius over the capture (1 for the fit's own capture) and the share of 5.6° phase bins reached. */
  readonly meanRadius: number | null;
  readonly binCoverage: number;
  /** Samples analysed, and the blocks they came from: one block of 4096 in `analysedEvery` of a long capture (createAnalysisSchedule). */
  readonly samples: number;
  readonly analysedEvery: number;
  /** Always true for one capture: a once-per-fringe amplitude change locked to the phase looks exactly like an offset to the fit. */
  readonly offsetIndistinguishableFromModulation: true;
}

/** The `harmonics` section: e(φ) = Σ cos[k−1]·cos kφ + sin[k−1]·sin kφ (rad) is taken off the ellipse-corrected phase. */
export interface CalibrationHarmonics {
  readonly orders: number;
  readonly cos: readonly number[];
  readonly sin: readonly number[];
  /** The assumption the estimate rests on, and what was checked. */
  readonly assumption: string;
  readonly fringes: number;
  readonly residualRmsRad: number;
}

export const HARMONIC_ASSUMPTION =
  'calibration move smooth in time (a cubic over the move, e.g. steady velocity) over at least 100 fringes; checked: fringes spanned and the RMS the model leaves';

const finiteOrNull = (value: number): number | null => (Number.isFinite(value) ? value : null);

export function calibrationResidualOf(summary: ResidualSummary, analysedEvery: number): CalibrationResidual {
  return {
    radiusHarmonics: summary.radiusHarmonics.map(finiteOrNull),
    radiusDriftRelative: finiteOrNull(summary.radiusDriftRelative),
    radiusNoiseRms: finiteOrNull(summary.radiusNoiseRms),
    noiseSpectralSlope: finiteOrNull(summary.noiseSpectralSlope),
    meanRadius: finiteOrNull(summary.meanRadius),
    binCoverage: summary.binCoverage,
    samples: summary.samples,
    analysedEvery,
    offsetIndistinguishableFromModulation: true,
  };
}

export const CONVENTION = 'x = amplitudeX*cos(phi) + offsetX; y = amplitudeY*sin(phi + phaseErrorRad) + offsetY';
export const LAYOUT_MODEL = 'I_k = P*(offset_k + amplitude_k*cos(phi - phaseRad_k)); P = 1 for two outputs, else the source power (mean 1)';

/**
 * The file for a fit. `channels`: the layout of 3 or 4 outputs (the fit is then the ellipse of the power-normalised
 * pair, kept only for its quality figures); omitted for two outputs, whose layout follows from the ellipse.
 */
export function calibrationFileOf(
  fit: Extract<EllipseFitResult, { ok: true }>,
  info: CaptureInfo,
  channels?: readonly ChannelParameters[],
  residual?: { readonly summary: ResidualSummary; readonly analysedEvery: number },
  harmonics?: CalibrationHarmonics,
): CalibrationFile {
  const integer = info.sampleEncoding === 'int16' || info.sampleEncoding === 'int24' || info.sampleEncoding === 'integer-text';
  const layout = channels ?? channelsOfEllipse(fit.calibration);
  return {
    format: CALIBRATION_FORMAT,
    version: CALIBRATION_VERSION,
    ...(channels === undefined ? fit.calibration : {}),
    layout: { model: LAYOUT_MODEL, channels: layout.map((channel, k) => ({ name: info.channels[k]!, ...channel })) },
    units: integer ? 'adc-counts' : 'capture-units',
    convention: CONVENTION,
    fit: { samples: fit.samples, coverage: fit.coverage, residualRms: fit.residualRms },
    capture: { file: info.file, format: info.format, rateHz: info.rateHz, sampleEncoding: info.sampleEncoding },
    ...(harmonics === undefined ? {} : { harmonics }),
    ...(residual === undefined ? {} : { residual: calibrationResidualOf(residual.summary, residual.analysedEvery) }),
    createdAt: new Date().toISOString(),
  };
}

/** What a calibration file holds: the layout, and the ellipse when it has two outputs (null for three or four). */
export interface CalibrationLayout {
  readonly channels: readonly ChannelParameters[];
  /** The capture columns or channels of the outputs, in order. */
  readonly names: readonly string[];
  readonly ellipse: EllipseCalibration | null;
}

/** Reads and checks a calibration file of either version; errors name the file and the field. */
export async function readCalibrationLayout(path: string): Promise<CalibrationLayout> {
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
  const version = record.version as number;
  if (version !== 1 && version !== CALIBRATION_VERSION) {
    throw new Error(`${path}: unsupported calibration version ${JSON.stringify(record.version)} (this fringetally reads versions 1 and ${CALIBRATION_VERSION})`);
  }
  try {
    if (version === 1) {
      // Version 1: the ellipse alone, of the capture's x and y.
      const ellipse = validateCalibration(
        {
          offsetX: record.offsetX as number,
          offsetY: record.offsetY as number,
          amplitudeX: record.amplitudeX as number,
          amplitudeY: record.amplitudeY as number,
          phaseErrorRad: record.phaseErrorRad as number,
        },
        'calibration',
      );
      return { channels: channelsOfEllipse(ellipse), names: [], ellipse };
    }
    const listed = record.layout?.channels;
    if (!Array.isArray(listed)) throw new Error('layout.channels must be an array of 2 to 4 outputs');
    const channels = validateChannelParameters(listed, 'layout.channels');
    const names = listed.map((channel, k) => {
      if (typeof channel.name !== 'string' || channel.name === '') throw new Error(`layout.channels[${k}].name must be a column or channel name`);
      return channel.name;
    });
    return { channels, names, ellipse: channels.length === 2 ? ellipseOfChannels(channels, 'layout.channels') : null };
  } catch (error) {
    throw new Error(`${path}: ${(error as Error).message}`);
  }
}

/** Reads a two-output calibration file's ellipse; a layout of 3 or 4 outputs is refused with the reason. */
export async function readCalibrationFile(path: string): Promise<EllipseCalibration> {
  const layout = await readCalibrationLayout(path);
  if (layout.ellipse === null) {
    throw new Error(`${path}: a calibration of ${layout.channels.length} detector outputs (${layout.names.join(',')}); this command combines two outputs per axis only (replay and calibrate take --channels)`);
  }
  return layout.ellipse;
}

/** The fit's residual RMS recorded in a calibration file (it sets the calibration_stale bound), if the file has it. */
export async function readCalibrationFitResidual(path: string): Promise<number | undefined> {
  const record = JSON.parse(await readFile(path, 'utf8')) as Partial<CalibrationFile>;
  const rms = record.fit?.residualRms;
  return typeof rms === 'number' && rms >= 0 && rms <= 1 ? rms : undefined;
}

/** The harmonic correction stored in a calibration file, checked, or undefined when the file has none. */
export async function readCalibrationHarmonics(path: string): Promise<PhaseHarmonics | undefined> {
  const record = JSON.parse(await readFile(path, 'utf8')) as Partial<CalibrationFile>;
  if (record.harmonics === undefined) return undefined;
  const { cos, sin } = record.harmonics as Partial<CalibrationHarmonics>;
  if (!Array.isArray(cos) || !Array.isArray(sin)) throw new Error(`${path}: "harmonics" needs the arrays "cos" and "sin"`);
  try {
    return createHarmonicCorrection({ cos, sin }).harmonics;
  } catch (error) {
    throw new Error(`${path}: ${(error as Error).message}`);
  }
}
