// `fringetally calibrate`: fits the Heydemann correction to a capture and writes the calibration file.
import { writeFile, rename } from 'node:fs/promises';
import { parseCommandLine, numberOption, UsageError, type Command } from '../cli-kit.js';
import { fitCapture, runCapture } from '../capture-run.js';
import { calibrationFileOf } from '../calibration-file.js';
import { captureOptionHelp, captureOptionSpecs, captureOptionsOf, lengthScaleOf, measureOptionHelp, measureOptionSpecs } from '../measure-options.js';
import { createProgress } from '../progress.js';
import { formatCalibration, formatChannels, formatPeriodicError, formatPower, writeReportFile } from '../report.js';

const help = `Usage: fringetally calibrate <capture.csv|capture.wav> --out cal.json [options]

Fits the ellipse (Heydemann correction) to the whole capture, prints its parameters, the fit quality, the
phase coverage and the periodic error before and after correction, and writes the calibration file
(versioned JSON, offsets and amplitudes in the capture's own units: ADC counts for integer captures).
With three or four outputs (--channels A,B,C[,D]) it first finds the source power as the steadiest
combination of the outputs (it assumes the power does not follow the fringe), fits the ellipse of the
power-normalised pair, and writes every output's offset, gain and phase.
Refuses (exit 1) when the capture covers too little of the ellipse: record at least one full fringe of motion.

Options:
  --out FILE             calibration file to write (JSON)
  --min-coverage F       least phase coverage accepted, fraction of a fringe (default 0.75)
  --report FILE          also write a self-contained HTML report (Lissajous figure, periodic error)
  --quiet                no progress bar and no summary
${measureOptionHelp}
  (calibrate uses them only to express the periodic error in nm; defaults 632.9908 nm and fold 2)
${captureOptionHelp}

Periodic error "before" is the phase error of the uncorrected signals (ADC mid-scale removed only) against
the corrected phase; "after" is the corrected phase's deviation from smooth motion, measured on stretches of
steady motion (fringe rate at least 10x the smoothing bandwidth).`;

async function run(argv: readonly string[]): Promise<number> {
  const { values, positionals } = parseCommandLine(
    argv,
    {
      out: { type: 'string' },
      'min-coverage': { type: 'string' },
      report: { type: 'string' },
      quiet: { type: 'boolean' },
      ...measureOptionSpecs,
      ...captureOptionSpecs,
    },
    true,
  );
  if (positionals.length !== 1) throw new UsageError('give exactly one capture file');
  const path = positionals[0]!;
  if (values.out === undefined) throw new UsageError('--out is required');
  const quiet = values.quiet === true;
  const scale = lengthScaleOf(values, { wavelengthNm: 632.9908, fold: 2 });
  const open = captureOptionsOf(values);
  const minCoverage = numberOption('min-coverage', values['min-coverage']);
  const progress = createProgress(quiet);

  const { fit, info, channels } = await fitCapture(path, open, minCoverage === undefined ? {} : { minCoverage }, progress);
  if (!fit.ok) {
    process.stderr.write(`fringetally calibrate: ${path}: calibration refused: ${fit.message}\n`);
    return 1;
  }
  // The index only scales the nm figures here; the calibration itself does not depend on it.
  const settings = { ...scale, refractiveIndex: scale.refractiveIndex ?? 1 };
  const notes = [...scale.notes, ...(scale.refractiveIndex === undefined ? ['periodic error in nm at n = 1 (vacuum wavelength)'] : [])];
  const result = await runCapture(path, { open, calibration: fit.calibration, ...(channels === undefined ? {} : { channels }), settings, progress });
  const file = calibrationFileOf(fit, info, channels);
  const temporary = `${values.out}.partial-${process.pid}`;
  await writeFile(temporary, JSON.stringify(file, null, 2) + '\n');
  await rename(temporary, values.out);
  if (values.report !== undefined) {
    await writeReportFile(values.report, { title: `Calibration of ${path}`, calibration: fit.calibration, fit, run: result, settings, notes, budget: null });
  }
  if (!quiet) {
    const lines = [
      `capture     ${path} (${info.format}, ${result.samples} samples at ${info.rateHz} Hz, ${info.sampleEncoding})`,
      ...(channels === undefined ? formatCalibration(fit.calibration, file.units) : formatChannels(file.layout.channels, file.units)),
      ...(result.power === null ? [] : [formatPower(result.power)]),
      `fit         ${channels === undefined ? '' : 'power-normalised pair: '}residual ${(fit.residualRms * 100).toFixed(3)} % of the radius, phase coverage ${fit.coverage.toFixed(3)} of a fringe, ${fit.samples} samples`,
      ...formatPeriodicError(result),
      ...notes.map((note) => `note        ${note}`),
      `wrote       ${values.out}${values.report === undefined ? '' : ` and report ${values.report}`}`,
    ];
    process.stdout.write(lines.join('\n') + '\n');
  }
  return 0;
}

export const calibrate: Command = { name: 'calibrate', summary: 'fit the ellipse correction to a capture and write cal.json', help, run };
