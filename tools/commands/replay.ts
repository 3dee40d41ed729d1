// `fringetally replay`: the whole pipeline over a capture file, rows of position, velocity, level and alarms.
import { extname } from 'node:path';
import { alarmKinds, alarmNames, type PhaseHarmonics } from '../../src/core/index.js';
import { readEnvironmentLog } from '../../src/io/capture/index.js';
import { createResultWriter, type ResultFormat } from '../../src/io/results/index.js';
import { createTruthComparison, createWelchEstimator, type TruthComparison, type WelchEstimator } from '../../src/core/index.js';
import { openTruthFile, type TruthReader } from '../../src/io/capture/index.js';
import type { ResultBlock, ResultWriter } from '../../src/io/results/index.js';
import { checkFiles, fileHash, formatNumber, LASER_CAUTION, numberOption, parseCommandLine, say as sayOnStderr, UsageError, type Command } from '../cli-kit.js';
import { runCapture } from '../capture-run.js';
import { fitCapture } from '../fit-capture.js';
import { readCalibrationFitResidual, readCalibrationHarmonics, readCalibrationLayout } from '../calibration-file.js';
import {
  analysisThreadOf,
  analysisThreadOptionHelp,
  analysisThreadOptionSpecs,
  captureOptionHelp,
  captureOptionSpecs,
  captureOptionsOf,
  lengthScaleOf,
  measureOptionHelp,
  measureOptionSpecs,
} from '../measure-options.js';
import { createProgress } from '../progress.js';
import { formatModelWatch, formatPeriodicError, formatPower, formatTruthError } from '../summary.js';
import type { PositionSpectrum } from '../report.js';
import { budgetOf, environmentLogIndex, environmentOf, environmentOptionHelp, environmentOptionSpecs, equationOf, withConfig } from '../environment-options.js';

const help = `Usage: fringetally replay <capture.csv|capture.wav> --wavelength-nm L --fold N --out result.csv|result.jsonl
                          [--calibration cal.json] [--every N] [--report report.html] [options]

Runs the whole pipeline over a recorded capture. Without --calibration it first fits the correction to the
capture itself, and says so. Rows: t (s), position_m (m, relative to the first sample), velocity_m_s (m/s),
level (corrected radius over calibrated radius), alarms (names of the active alarms, space-separated;
count_lost stays on every row until the position is re-referenced). Positive displacement advances the
corrected phase atan2(y, x).

Options:
  --out FILE|-           result file; .csv or .jsonl (or --format with -, standard output)
  --format csv|jsonl     result format when it cannot be told from the file name
  --calibration FILE     calibration from fringetally calibrate (default: fit this capture first)
  --every N              write every Nth sample (default 1: every sample)
  --report FILE          also write a self-contained HTML report
  --environment-log FILE air conditions that change during the run: CSV with a header naming the columns
                         t (s from the first sample), temperature (°C), pressure (Pa), humidity (% relative)
                         and optionally co2 (µmol/mol); interpolated linearly, held outside the log. Replaces
                         the fixed air conditions; the index rescales the reading, never the count
  --truth FILE           compare with the true position: a CSV with columns t (s) and position_m (m), such as
                         the truth file of fringetally simulate; maximum, RMS and periodic error in the summary
                         and the report (the truth is interpolated at the capture's times; both are zeroed at
                         the first sample compared)
  --quiet                no progress bar and no summary
${measureOptionHelp}
${environmentOptionHelp}
${captureOptionHelp}
${analysisThreadOptionHelp}

The summary gives the final reading with its combined and expanded uncertainty (GUM) when the environment is
given; the report holds the whole budget.

${LASER_CAUTION}`;

const optionSpecs = {
  out: { type: 'string' },
  format: { type: 'string' },
  calibration: { type: 'string' },
  every: { type: 'string' },
  report: { type: 'string' },
  truth: { type: 'string' },
  'environment-log': { type: 'string' },
  quiet: { type: 'boolean' },
  ...measureOptionSpecs,
  ...environmentOptionSpecs,
  ...captureOptionSpecs,
  ...analysisThreadOptionSpecs,
} as const;

/** A result writer that also hands every block to `observe` (truth comparison, spectrum) before writing it. */
function observed(writer: ResultWriter, observe: (block: ResultBlock) => Promise<void>): ResultWriter {
  return {
    path: writer.path,
    get rowsWritten() {
      return writer.rowsWritten;
    },
    async write(block) {
      await observe(block);
      await writer.write(block);
    },
    close: () => writer.close(),
    abort: () => writer.abort(),
  };
}

/** Compares each block's positions with the truth file at the same times. */
function truthObserver(truth: TruthReader, comparison: TruthComparison) {
  let times = new Float64Array(0);
  let trueM = new Float64Array(0);
  return async (block: ResultBlock): Promise<void> => {
    if (times.length < block.length) {
      times = new Float64Array(block.length);
      trueM = new Float64Array(block.length);
    }
    for (let i = 0; i < block.length; i++) times[i] = block.t?.[i] ?? (block.firstIndex + i) / block.rateHz!;
    await truth.fill(times, trueM, block.length);
    comparison.add(block.positionM, trueM, block.length);
  };
}

/**
 * Welch estimates of the position's spectrum at three resolutions, since a CSV capture's length is not known
 * ahead; the report shows the finest one that averaged at least 8 segments (else the finest with any).
 */
const SEGMENT_CHOICES = [1024, 8192, 65_536];
const WANTED_SEGMENTS = 8;

function spectrumObserver() {
  let estimators: WelchEstimator[] | null = null;
  return {
    add(block: ResultBlock): void {
      estimators ??= SEGMENT_CHOICES.map((segmentSamples) => createWelchEstimator({ rateHz: block.rateHz!, segmentSamples }));
      for (const estimator of estimators) estimator.add(block.positionM, block.length);
    },
    result(): PositionSpectrum | null {
      const used = (estimators ?? []).filter((estimator) => estimator.segments > 0);
      const chosen = used.filter((estimator) => estimator.segments >= WANTED_SEGMENTS).pop() ?? used.pop();
      if (chosen === undefined) return null;
      const density = chosen.result();
      return { frequencyHz: density.frequencyHz, asd: density.asd, segments: density.segments, segmentSamples: chosen.options.segmentSamples, binWidthHz: density.binWidthHz };
    },
  };
}

async function run(argv: readonly string[]): Promise<number> {
  const commandLine = ['fringetally', 'replay', ...argv];
  const parsed = parseCommandLine(argv, optionSpecs, true);
  const values = withConfig(parsed.values, optionSpecs);
  if (parsed.positionals.length !== 1) throw new UsageError('give exactly one capture file');
  const path = parsed.positionals[0]!;
  const out = values.out as string | undefined;
  if (out === undefined) throw new UsageError('--out is required');
  const reportPath = values.report as string | undefined;
  const truthPath = values.truth as string | undefined;
  const calibrationPath = values.calibration as string | undefined;
  const extension = extname(out).toLowerCase();
  const formatText = values.format ?? (extension === '.jsonl' ? 'jsonl' : extension === '.csv' ? 'csv' : undefined);
  if (formatText !== 'csv' && formatText !== 'jsonl') throw new UsageError(`cannot tell the result format of "${out}": use .csv, .jsonl or --format csv|jsonl`);
  const every = numberOption('every', values.every as string | undefined) ?? 1;
  if (!Number.isInteger(every) || every < 1) throw new UsageError(`--every must be a positive integer (got ${values.every})`);
  const quiet = values.quiet === true;
  const scale = lengthScaleOf(values, {});
  const environment = environmentOf(values, scale.wavelengthM, scale.refractiveIndex);
  const settings = {
    wavelengthM: scale.wavelengthM,
    fold: scale.fold,
    refractiveIndex: environment.refractiveIndex,
    lengthScale: environment.thermalFactor,
    ...(scale.bandwidthHz === undefined ? {} : { bandwidthHz: scale.bandwidthHz }),
    ...(scale.unwrap === undefined ? {} : { unwrap: scale.unwrap }),
  };
  const notes = [...scale.notes, ...environment.notes];
  const environmentLogPath = values['environment-log'] as string | undefined;
  let refractiveIndexAt: ((tS: number) => number) | undefined;
  if (environmentLogPath !== undefined) {
    if (environment.air !== null || scale.refractiveIndex !== undefined) {
      throw new UsageError('give either --environment-log or fixed air conditions (--temperature-c … or --refractive-index), not both');
    }
    const schedule = await readEnvironmentLog(environmentLogPath);
    const equation = equationOf(values);
    const indexAt = environmentLogIndex(environmentLogPath, () => schedule, scale.wavelengthM, equation, (line) => process.stderr.write(`fringetally replay: ${line}\n`));
    refractiveIndexAt = indexAt;
    const first = indexAt(schedule.records[0]!.tS);
    const last = indexAt(schedule.records.at(-1)!.tS);
    const vacuumNote = notes.findIndex((note) => note.startsWith('no refractive index'));
    if (vacuumNote >= 0) notes.splice(vacuumNote, 1);
    notes.push(
      `environment log ${environmentLogPath}: ${schedule.records.length} readings over ${schedule.records.at(-1)!.tS - schedule.records[0]!.tS} s, ` +
        `refractive index ${first.toFixed(10)} → ${last.toFixed(10)} (${equation}), set per block of samples; no uncertainty budget (it needs fixed air conditions)`,
    );
  }
  let open = captureOptionsOf(values);
  const analysisThread = analysisThreadOf(values);
  const progress = createProgress(quiet);
  const say = (lines: string | readonly string[]) => {
    if (!quiet) sayOnStderr(lines);
  };
  await checkFiles(
    [
      { option: 'the capture', path },
      ...(calibrationPath === undefined ? [] : [{ option: '--calibration', path: calibrationPath }]),
      ...(truthPath === undefined ? [] : [{ option: '--truth', path: truthPath }]),
      ...(typeof values.config === 'string' ? [{ option: '--config', path: values.config }] : []),
      ...(environmentLogPath === undefined ? [] : [{ option: '--environment-log', path: environmentLogPath }]),
    ],
    [{ option: '--out', path: out }, ...(reportPath === undefined ? [] : [{ option: '--report', path: reportPath }])],
  );
  for (const note of notes) say(`note: ${note}`);

  let calibration;
  let channels;
  let fit = null;
  let fitResidualRms: number | undefined;
  let harmonics: PhaseHarmonics | undefined;
  let calibrationSource: string;
  if (calibrationPath !== undefined) {
    const layout = await readCalibrationLayout(calibrationPath);
    if (layout.ellipse === null) {
      // Three or four outputs: the capture's columns default to the ones the calibration was made from.
      if (open.channels === undefined) open = { ...open, channels: layout.names };
      if (open.channels?.length !== layout.channels.length) {
        throw new UsageError(`${calibrationPath} calibrates ${layout.channels.length} detector outputs (${layout.names.join(',')}): give as many with --channels`);
      }
      channels = layout.channels;
    } else if ((open.channels?.length ?? 2) !== 2) {
      throw new UsageError(`${calibrationPath} calibrates two detector outputs: give two with --channels (got ${open.channels!.length})`);
    }
    calibration = layout.ellipse ?? { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 };
    fitResidualRms = await readCalibrationFitResidual(calibrationPath);
    harmonics = await readCalibrationHarmonics(calibrationPath);
    if (harmonics !== undefined) say(`applying the calibration's harmonic correction (orders 1..${harmonics.cos.length}) beyond the ellipse`);
    calibrationSource = `${calibrationPath} (sha256 ${await fileHash(calibrationPath)})`;
  } else {
    calibrationSource = `fitted to this capture (no --calibration given)`;
    say(`no --calibration given: fitting the correction to ${path} first`);
    const fitted = await fitCapture(path, open, {}, progress);
    if (!fitted.fit.ok) {
      process.stderr.write(`fringetally replay: ${path}: cannot fit a correction: ${fitted.fit.message}\n`);
      return 1;
    }
    fit = fitted.fit;
    calibration = fitted.fit.calibration;
    channels = fitted.channels;
    fitResidualRms = fitted.fit.residualRms;
  }

  const truth = truthPath === undefined ? null : await openTruthFile(truthPath);
  // Three or four outputs: the source power is a reading of its own, in a column after the level.
  const rows = await createResultWriter(out, { format: formatText as ResultFormat, every, power: channels !== undefined && channels.length > 2 });
  let result;
  const comparison = truth === null ? null : createTruthComparison({ metresPerFringe: settings.wavelengthM / (settings.fold * settings.refractiveIndex) });
  const compare = truth === null ? null : truthObserver(truth, comparison!);
  // The spectrum is drawn only in the report.
  const spectrum = reportPath === undefined ? null : spectrumObserver();
  try {
    const writer = observed(rows, async (block) => {
      spectrum?.add(block);
      await compare?.(block);
    });
    result = await runCapture(path, {
      analysisThread,
      open,
      calibration,
      ...(channels === undefined ? {} : { channels }),
      settings,
      writer,
      progress,
      modelWatch: fitResidualRms === undefined ? {} : { fitResidualRms },
      ...(harmonics === undefined ? {} : { harmonics }),
      ...(refractiveIndexAt === undefined ? {} : { refractiveIndexAt }),
    });
    await rows.close();
  } catch (error) {
    await rows.abort();
    throw error;
  } finally {
    await truth?.close();
  }
  const truthSummary = comparison === null ? null : { file: truthPath!, ...comparison.summary() };
  const residualAmplitudeM = Math.max(result.after.summary.firstHarmonicRad, result.after.summary.secondHarmonicRad) * result.metresPerRad;
  const budget = budgetOf(environment, result.finalPositionM, Number.isFinite(residualAmplitudeM) ? residualAmplitudeM : 0);
  if (reportPath !== undefined) {
    // Loaded only here: its charts bring d3, which a replay without a report need not load.
    const { writeReportFile } = await import('../report.js');
    await writeReportFile(reportPath, {
      title: `Replay of ${path}`,
      calibration,
      fit,
      run: result,
      settings,
      notes,
      budget,
      truth: truthSummary,
      spectrum: spectrum?.result() ?? null,
      provenance: { commandLine, inputHash: await fileHash(path), calibrationSource },
    });
  }
  for (const warning of result.info.warnings) sayOnStderr(`warning: ${warning}`);
  if (!quiet) {
    const raised = alarmKinds.filter((kind) => result.alarmCounts[kind] > 0).map((kind) => `${alarmNames[kind]} ×${result.alarmCounts[kind]}`);
    const lines = [
      ...(result.adcStated ? [] : ['note: the capture does not state its ADC format: saturation is not detected']),
      `replayed ${result.samples} samples at ${formatNumber(result.info.rateHz)} Hz; wrote ${rows.rowsWritten} rows to ${out === '-' ? 'standard output' : out}`,
      `final position ${(result.finalPositionM * 1e6).toFixed(6)} µm` +
        (budget === null ? '' : ` ± ${(budget.expandedUncertaintyM * 1e9).toFixed(3)} nm (U, k = ${budget.coverageFactor}; u = ${(budget.combinedStandardUncertaintyM * 1e9).toFixed(3)} nm)`) +
        (result.countLostAtEnd ? ' — COUNT LOST: not trustworthy until re-referenced' : ''),
      `alarms raised: ${raised.length === 0 ? 'none' : raised.join(', ')}`,
      ...(result.power === null ? [] : [formatPower(result.power)]),
      ...formatModelWatch(result),
      `speed limit ${result.speedLimits.unambiguousMS.toPrecision(4)} m/s unambiguous, overspeed alarm at ${result.speedLimits.overspeedMS.toPrecision(4)} m/s`,
      ...formatPeriodicError(result),
      ...(truthSummary === null ? [] : formatTruthError(truthSummary)),
      ...(reportPath === undefined ? [] : [`report: ${reportPath}`]),
    ];
    say(lines);
  }
  return 0;
}

export const replay: Command = { name: 'replay', summary: 'run the whole pipeline over a capture file', help, run };
