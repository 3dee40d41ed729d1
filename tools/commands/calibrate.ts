// `fringetally calibrate`: fits the Heydemann correction to a capture and writes the calibration file.
import { writeFileAtomically, type CaptureInfo } from '../../src/io/capture/index.js';
import { checkFiles, fileHash, parseCommandLine, numberOption, say, UsageError, type Command } from '../cli-kit.js';
import { analyseCapture, keepAnalysedParts, runCapture, type CaptureAnalysis } from '../capture-run.js';
import { fitCapture } from '../fit-capture.js';
import { calibrationFileOf, HARMONIC_ASSUMPTION } from '../calibration-file.js';
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
import { formatCalibration, formatChannels, formatPeriodicError, formatPower, formatResidual } from '../summary.js';
import {
  createEllipseFit,
  ELLIPSE_FIT_METHODS,
  exceededLimits,
  fitWarnings,
  MAX_HARMONIC_ORDER,
  resolveFitLimits,
  type EllipseFitMethod,
  type EllipseFitMethodOptions,
  type EllipseFitResult,
} from '../../src/core/index.js';

const help = `Usage: fringetally calibrate <capture.csv|capture.wav> --out cal.json [options]

Fits the ellipse (Heydemann's model, by default with the bias-reduced hyper least-squares fit) to the whole
capture, prints its parameters, the fit quality, the phase coverage and the periodic error before and after
correction, and writes the calibration file (versioned JSON, offsets and amplitudes in the capture's own units:
ADC counts for integer captures). Refuses (exit 1) when the capture covers too little of the ellipse (record at
least one full fringe of motion) or when the ellipse is beyond the plausibility limits below; a refusal names the
option that would change it. With three or four outputs (--channels A,B,C[,D]) it first finds the source power as
the steadiest combination of the outputs (it assumes the power does not follow the fringe), fits the ellipse of
the power-normalised pair, and writes every output's offset, gain and phase.

Options:
  --out FILE             calibration file to write (JSON)
  --fit METHOD           heydemann (classic least squares), taubin or hyper (bias-reduced; default, as the library)
  --min-coverage F       least phase coverage accepted, fraction of a fringe (default 0.75)
  --max-phase-error-deg D  largest quadrature error accepted, degrees (default 70; a warning beyond 45, where the
                         correction multiplies phase noise by 1/cos e > 1.41)
  --max-amplitude-ratio R  largest ratio of the two amplitudes accepted (default 4)
  --harmonics N          also estimate a correction of the periodic phase error beyond the ellipse (ghost beams,
                         detector nonlinearity), harmonics 1..N of the phase (N in 1..8), stored in the file and
                         applied by replay and listen. Assumes the capture is a smooth move (steady velocity, or a
                         gentle change of speed: a cubic in time) over at least 100 fringes; refused otherwise
  --report FILE          also write a self-contained HTML report (Lissajous figure, periodic error)
  --quiet                no progress bar and no summary
${measureOptionHelp}
  (calibrate uses them only to express the periodic error in nm; defaults 632.9908 nm and fold 2)
${captureOptionHelp}
${analysisThreadOptionHelp}

Periodic error "before" is the phase error of the uncorrected signals (ADC mid-scale removed only) against
the corrected phase; it is "not applicable" for unipolar (DC-coupled) signals, whose zero lies outside the
figure. "After" is measured in the phase domain: the corrected phase is cut into windows that each span two
fringes (or hold 4096 samples), fitted in each as a cubic in time (the motion, its own per window) plus harmonics
1-4 of the phase shared by all windows, so slow and irregular motion (reversals, stops) counts too. A window is
used only where the cubic follows the motion to within 0.003 rad RMS beyond the noise (motion it cannot follow would
read as periodic error), and not where an alarm is on the signal; when no window qualifies the summary says why.`;

async function run(argv: readonly string[]): Promise<number> {
  const { values, positionals } = parseCommandLine(
    argv,
    {
      out: { type: 'string' },
      'min-coverage': { type: 'string' },
      fit: { type: 'string' },
      'max-phase-error-deg': { type: 'string' },
      'max-amplitude-ratio': { type: 'string' },
      harmonics: { type: 'string' },
      report: { type: 'string' },
      quiet: { type: 'boolean' },
      ...measureOptionSpecs,
      ...captureOptionSpecs,
  ...analysisThreadOptionSpecs,
    },
    true,
  );
  if (positionals.length !== 1) throw new UsageError('give exactly one capture file');
  const path = positionals[0]!;
  if (values.out === undefined) throw new UsageError('--out is required');
  const quiet = values.quiet === true;
  const scale = lengthScaleOf(values, { wavelengthNm: 632.9908, fold: 2 });
  const open = captureOptionsOf(values);
  const analysisThread = analysisThreadOf(values);
  const fitOptions = fitOptionsOf(values);
  const harmonicOrders = numberOption('harmonics', values.harmonics);
  if (harmonicOrders !== undefined && !(Number.isInteger(harmonicOrders) && harmonicOrders >= 1 && harmonicOrders <= MAX_HARMONIC_ORDER)) {
    throw new UsageError(`--harmonics must be an integer in 1..${MAX_HARMONIC_ORDER} (got ${harmonicOrders})`);
  }
  const progress = createProgress(quiet);
  const report = values.report;
  await checkFiles([{ option: 'the capture', path }], [{ option: '--out', path: values.out }, ...(report === undefined ? [] : [{ option: '--report', path: report }])]);

  // Without a report or harmonics only the analyses' figures are wanted: a long WAV capture is then read only where
  // they look (analyseCapture), not run through whole, and those parts are kept from the fit's pass over it (two
  // outputs: three or four are run through whole).
  const analysesOnly = report === undefined && harmonicOrders === undefined;
  const keep = analysesOnly ? (captured: CaptureInfo) => (captured.channels.length === 2 ? keepAnalysedParts(captured, {}) : null) : undefined;
  const { fit, info, totalSamples, channels, kept } = await fitCapture(path, open, fitOptions, progress, keep);
  if (!fit.ok) {
    process.stderr.write(`fringetally calibrate: ${path}: calibration refused: ${fit.message}${refusalHint(fit, fitOptions)}\n`);
    return 1;
  }
  for (const warning of fitWarnings(fit.calibration)) process.stderr.write(`fringetally calibrate: warning: ${warning}\n`);
  // The index only scales the nm figures here; the calibration itself does not depend on it.
  const settings = { ...scale, refractiveIndex: scale.refractiveIndex ?? 1 };
  const notes = [...scale.notes, ...(scale.refractiveIndex === undefined ? ['periodic error in nm at n = 1 (vacuum wavelength)'] : [])];
  const runOptions = { analysisThread, open, calibration: fit.calibration, ...(channels === undefined ? {} : { channels }), settings, progress };
  const run = analysesOnly
    ? null
    : await runCapture(path, {
        ...runOptions,
        ...(harmonicOrders === undefined ? {} : { estimateHarmonics: { orders: harmonicOrders, totalSamples: Math.max(16, totalSamples) } }),
      });
  const result: CaptureAnalysis = run ?? (await analyseCapture(path, runOptions, kept));
  const estimate = run?.harmonicEstimate ?? null;
  if (estimate !== null && !estimate.ok) {
    process.stderr.write(`fringetally calibrate: ${path}: harmonic correction refused: ${estimate.message}; calibrate without --harmonics for the ellipse alone\n`);
    return 1;
  }
  const harmonics =
    estimate === null
      ? undefined
      : { orders: harmonicOrders!, ...estimate.harmonics, assumption: HARMONIC_ASSUMPTION, fringes: estimate.fringes, residualRmsRad: estimate.residualRmsRad };
  const file = calibrationFileOf(fit, info, channels, { summary: result.residual.summary, analysedEvery: result.analysedEvery }, harmonics);
  await writeFileAtomically(values.out, JSON.stringify(file, null, 2) + '\n');
  if (report !== undefined) {
    const provenance = { commandLine: ['fringetally', 'calibrate', ...argv], inputHash: await fileHash(path), calibrationSource: 'fitted to this capture' };
    // Loaded only here: its charts bring d3, which a calibration without a report need not load.
    const { writeReportFile } = await import('../report.js');
    await writeReportFile(report, { title: `Calibration of ${path}`, calibration: fit.calibration, fit, run: run!, settings, notes, budget: null, provenance });
  }
  for (const warning of info.warnings) say(`warning: ${warning}`);
  if (!quiet) {
    const lines = [
      `capture     ${path} (${info.format}, ${result.samples} samples at ${info.rateHz} Hz, ${info.sampleEncoding})`,
      ...(channels === undefined ? formatCalibration(fit.calibration, file.units) : formatChannels(file.layout.channels, file.units)),
      ...(result.power === null ? [] : [formatPower(result.power)]),
      `fit         ${createEllipseFit(fitOptions).method}, ${channels === undefined ? '' : 'power-normalised pair: '}residual ${(fit.residualRms * 100).toFixed(3)} % of the radius, phase coverage ${fit.coverage.toFixed(3)} of a fringe, ${fit.samples} samples`,
      ...formatPeriodicError(result),
      ...formatResidual(result),
      ...(harmonics === undefined
        ? []
        : [
            `harmonics   correction of orders 1..${harmonics.orders} beyond the ellipse, amplitudes ${harmonics.cos.map((c, k) => (Math.hypot(c, harmonics.sin[k]!) * result.metresPerRad * 1e9).toFixed(3)).join(' ')} nm; ` +
              `from a smooth move over ${harmonics.fringes.toFixed(0)} fringes (model leaves ${harmonics.residualRmsRad.toFixed(4)} rad RMS)`,
          ]),
      ...notes.map((note) => `note        ${note}`),
      `wrote       ${values.out}${values.report === undefined ? '' : ` and report ${values.report}`}`,
    ];
    say(lines);
  }
  return 0;
}

const DEG = Math.PI / 180;

/** The fit's options from the command line, in the library's units (rad). */
function fitOptionsOf(values: Record<string, unknown>): EllipseFitMethodOptions {
  const method = values.fit as string | undefined;
  if (method !== undefined && !(ELLIPSE_FIT_METHODS as readonly string[]).includes(method)) {
    throw new UsageError(`--fit must be one of ${ELLIPSE_FIT_METHODS.join(', ')} (got "${method}")`);
  }
  const minCoverage = numberOption('min-coverage', values['min-coverage'] as string | undefined);
  const maxPhaseErrorDeg = numberOption('max-phase-error-deg', values['max-phase-error-deg'] as string | undefined);
  const maxAmplitudeRatio = numberOption('max-amplitude-ratio', values['max-amplitude-ratio'] as string | undefined);
  if (maxPhaseErrorDeg !== undefined && !(maxPhaseErrorDeg > 0 && maxPhaseErrorDeg <= 90)) {
    throw new UsageError(`--max-phase-error-deg must be in (0, 90] degrees (got ${maxPhaseErrorDeg})`);
  }
  if (maxAmplitudeRatio !== undefined && !(maxAmplitudeRatio >= 1 && maxAmplitudeRatio <= 100)) {
    throw new UsageError(`--max-amplitude-ratio must be in [1, 100] (got ${maxAmplitudeRatio})`);
  }
  return {
    ...(method === undefined ? {} : { method: method as EllipseFitMethod }),
    ...(minCoverage === undefined ? {} : { minCoverage }),
    ...(maxPhaseErrorDeg === undefined ? {} : { maxPhaseErrorRad: maxPhaseErrorDeg * DEG }),
    ...(maxAmplitudeRatio === undefined ? {} : { maxAmplitudeRatio }),
  };
}

/** Names the option that would change a refusal. */
function refusalHint(fit: Extract<EllipseFitResult, { ok: false }>, options: EllipseFitMethodOptions): string {
  if (fit.reason === 'low-coverage') return ': record at least one full fringe of motion, or lower --min-coverage';
  if (fit.reason !== 'implausible' || fit.calibration === undefined) return '';
  const limits = resolveFitLimits(options);
  const hints = exceededLimits(fit.calibration, limits).map((limit) =>
    limit === 'maxPhaseErrorRad'
      ? `quadrature error ${(fit.calibration!.phaseErrorRad / DEG).toFixed(1)}° is beyond ±${(limits.maxPhaseErrorRad / DEG).toFixed(1)}°: --max-phase-error-deg widens the limit`
      : `--max-amplitude-ratio (now ${limits.maxAmplitudeRatio}) widens the amplitude-ratio limit`,
  );
  return hints.length === 0 ? '' : `; ${hints.join('; ')} (check the detectors first)`;
}

export const calibrate: Command = { name: 'calibrate', summary: 'fit the ellipse correction to a capture and write cal.json', help, run };
