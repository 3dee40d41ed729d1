// The position record the analysis commands (spectrum, positioning) read: either a raw quadrature capture, run
// through the whole pipeline as replay does, or a file of positions such as replay's result CSV (a position_m
// column, times from its t column or --rate-hz).
import { openCapture, type CaptureInfo } from '../src/io/capture/index.js';
import type { ResultBlock, ResultWriter } from '../src/io/results/index.js';
import { UsageError } from './cli-kit.js';
import { runCapture } from './capture-run.js';
import { fitCapture } from './fit-capture.js';
import { readCalibrationFile } from './calibration-file.js';
import { captureOptionHelp, captureOptionSpecs, captureOptionsOf, lengthScaleOf, measureOptionHelp, measureOptionSpecs } from './measure-options.js';
import type { Progress } from './progress.js';

export const POSITION_COLUMN = 'position_m';

export const positionInputSpecs = {
  calibration: { type: 'string' },
  ...measureOptionSpecs,
  ...captureOptionSpecs,
} as const;

export const positionInputHelp = `Input: a raw capture (x and y channels) runs through the pipeline as in replay, with
--wavelength-nm and --fold (and --calibration, else the correction is fitted to the capture first); a file with a
${POSITION_COLUMN} column (replay's result CSV, in metres) is read as it is, with times from its t column (or --rate-hz).
  --calibration FILE     calibration from fringetally calibrate (raw captures only)
${measureOptionHelp}
${captureOptionHelp}`;

export interface PositionInput {
  readonly info: CaptureInfo;
  /** Samples per second of the positions. */
  readonly rateHz: number;
  /** λ_vac / (fold · n), m, when the wavelength and fold are known (always for raw captures). */
  readonly metresPerFringe: number | null;
  /** `pipeline` for a raw capture, `positions` for a file of positions. */
  readonly source: 'pipeline' | 'positions';
  readonly notes: readonly string[];
}

type Values = Record<string, string | boolean | undefined>;

/** What the reader knows before the first position: the rate and, when known, the length per fringe (m). */
export interface PositionStart {
  readonly rateHz: number;
  readonly metresPerFringe: number | null;
}

/**
 * Reads the positions of `path`: `begin` is called once before the first block and returns the consumer of the
 * blocks (metres; the arrays are reused between calls). Resolves when the whole file has been read.
 */
export async function readPositions(
  path: string,
  values: Values,
  progress: Progress,
  say: (line: string) => void,
  begin: (start: PositionStart) => (positionM: Float64Array, length: number) => void,
): Promise<PositionInput> {
  const open = captureOptionsOf(values);
  const probe = await openCapture(path, open.rateHz === undefined ? { xChannel: 1, yChannel: 1, timeColumn: null, rateHz: 1 } : { ...open, xChannel: 1, yChannel: 1 });
  const names = probe.info.channelNames;
  await probe.close();
  if (names.includes(POSITION_COLUMN)) {
    if (values.calibration !== undefined) throw new UsageError(`--calibration applies to raw captures only; ${path} holds positions (${POSITION_COLUMN})`);
    const wavelengthGiven = values['wavelength-nm'] !== undefined && values.fold !== undefined;
    const scale = wavelengthGiven ? lengthScaleOf(values, {}) : null;
    const capture = await openCapture(path, { ...open, xChannel: POSITION_COLUMN, yChannel: POSITION_COLUMN });
    const metresPerFringe = scale === null ? null : scale.wavelengthM / (scale.fold * (scale.refractiveIndex ?? 1));
    const consume = begin({ rateHz: capture.info.rateHz, metresPerFringe });
    progress.start(`read ${path}`, capture.info.totalSamples);
    try {
      for await (const block of capture.blocks()) {
        consume(block.x, block.length);
        progress.update(block.firstIndex + block.length);
      }
    } finally {
      progress.stop();
      await capture.close();
    }
    return {
      info: capture.info,
      rateHz: capture.info.rateHz,
      metresPerFringe,
      source: 'positions',
      notes: [],
    };
  }
  const scale = lengthScaleOf(values, {});
  const refractiveIndex = scale.refractiveIndex ?? 1;
  const notes = [...scale.notes, ...(scale.refractiveIndex === undefined ? ['no --refractive-index: n = 1, the vacuum wavelength is used'] : [])];
  let calibration;
  if (typeof values.calibration === 'string') {
    calibration = await readCalibrationFile(values.calibration);
  } else {
    say(`no --calibration given: fitting the correction to ${path} first`);
    const fitted = await fitCapture(path, open, {}, progress);
    if (!fitted.fit.ok) throw new Error(`${path}: cannot fit a correction: ${fitted.fit.message}`);
    calibration = fitted.fit.calibration;
  }
  const metresPerFringe = scale.wavelengthM / (scale.fold * refractiveIndex);
  const peek = await openCapture(path, open);
  const consume = begin({ rateHz: peek.info.rateHz, metresPerFringe });
  await peek.close();
  // The pipeline's rows go to the analysis instead of a file.
  let rows = 0;
  const sink: ResultWriter = {
    path: '(analysis)',
    get rowsWritten() {
      return rows;
    },
    async write(block: ResultBlock) {
      consume(block.positionM, block.length);
      rows += block.length;
    },
    async close() {},
    async abort() {},
  };
  const settings = {
    wavelengthM: scale.wavelengthM,
    fold: scale.fold,
    refractiveIndex,
    ...(scale.bandwidthHz === undefined ? {} : { bandwidthHz: scale.bandwidthHz }),
    ...(scale.unwrap === undefined ? {} : { unwrap: scale.unwrap }),
  };
  const result = await runCapture(path, { open, calibration, settings, writer: sink, progress });
  if (result.countLostAtEnd) notes.push('COUNT LOST during the capture: positions after it are not trustworthy');
  return {
    info: result.info,
    rateHz: result.info.rateHz,
    metresPerFringe,
    source: 'pipeline',
    notes,
  };
}
