// The text summaries of calibrate and replay (what they print), apart from the HTML report (report.ts), whose
// charts load d3: a run without --report loads none of it.
import { MODEL_WATCH_ALARM, residualMeaning, type EllipseCalibration, type TruthComparisonSummary } from '../src/core/index.js';
import { CAPTURE_BLOCK_SAMPLES, type CaptureAnalysis, type PeriodicErrorResult, type RunResult } from './capture-run.js';
import { formatNumber } from './cli-kit.js';

/** Nanometres to the picometre; a value that rounds to zero prints without a sign. */
export const nm = (metres: number) => (metres * 1e9).toFixed(3).replace(/^-(0\.0+)$/, '$1');
/** `digits` significant digits, without exponent for ordinary magnitudes and without float tails. */
export const sig = (value: number, digits = 4) => (Number.isFinite(value) ? formatNumber(value, digits) : String(value));

export function formatCalibration(c: EllipseCalibration, units: string): string[] {
  return [
    `offsetX     ${c.offsetX.toFixed(4)} ${units}`,
    `offsetY     ${c.offsetY.toFixed(4)} ${units}`,
    `amplitudeX  ${c.amplitudeX.toFixed(4)} ${units}`,
    `amplitudeY  ${c.amplitudeY.toFixed(4)} ${units}`,
    `phaseError  ${c.phaseErrorRad.toFixed(6)} rad (${((c.phaseErrorRad * 180) / Math.PI).toFixed(4)}°)`,
  ];
}

/** The layout of three or four outputs: I = P·(offset + amplitude·cos(φ − phase)), phases after output 1's. */
export function formatChannels(channels: readonly { name: string; offset: number; amplitude: number; phaseRad: number }[], units: string): string[] {
  return channels.map(
    (c, k) =>
      `output ${k + 1}    ${c.name}: offset ${c.offset.toFixed(4)} ${units}, amplitude ${c.amplitude.toFixed(4)} ${units}, phase ${((c.phaseRad * 180) / Math.PI).toFixed(3)}°`,
  );
}

/** The source power over the capture, relative to the calibration capture's mean. */
export function formatPower(power: { min: number; max: number; mean: number }): string {
  return `power       source power ${power.min.toFixed(4)} to ${power.max.toFixed(4)} (mean ${power.mean.toFixed(4)}; 1 = mean of the calibration capture), removed sample by sample`;
}

function periodicRow(label: string, result: PeriodicErrorResult, metresPerRad: number, notMeasured: string | null): string {
  const s = result.summary;
  if (notMeasured !== null) return `${label}  ${notMeasured}`;
  return (
    `${label}  p-p ${nm(s.peakToPeakRad * metresPerRad)} nm, RMS ${nm(s.rmsRad * metresPerRad)} nm, ` +
    `1st harmonic ${nm(s.firstHarmonicRad * metresPerRad)} nm, 2nd harmonic ${nm(s.secondHarmonicRad * metresPerRad)} nm ` +
    `(${s.samples} samples, ${(s.binCoverage * 100).toFixed(0)} % of the phase bins)`
  );
}

/** A long capture's analyses take every n-th block (createAnalysisSchedule): said where their figures are. */
export function analysedShare(run: Pick<RunResult, 'analysedEvery'>): string {
  return `one block of ${CAPTURE_BLOCK_SAMPLES} samples in every ${run.analysedEvery}, spread over the whole capture`;
}

/** "Before" bins every clean sample: it is missing only when none was clean. */
export function notMeasuredBefore(run: Pick<RunResult, 'before'>): string | null {
  return run.before.summary.samples === 0 ? 'no sample with a clean signal to measure it' : null;
}

export function formatPeriodicError(run: CaptureAnalysis): string[] {
  return [
    'periodic error (amplitudes of the harmonics; p-p and RMS of the phase-binned mean):',
    run.beforeNotApplicable === null ? periodicRow('  before', run.before, run.metresPerRad, notMeasuredBefore(run)) : `  before  not applicable: ${run.beforeNotApplicable}`,
    periodicRow('  after ', run.after, run.metresPerRad, run.afterNotMeasured),
    ...(run.analysedEvery > 1 ? [`  (periodic error and radius analysed on ${analysedShare(run)})`] : []),
  ];
}

/** The calibration_stale alarm in the summary's words: when the signal left the calibration's model, and the bound. */
export function formatModelWatch(run: RunResult): string[] {
  const { events, raised, activeAtEnd, options } = run.modelWatch;
  const bound = `bounds: mean radius within ±${(options.maxRadiusChange * 100).toFixed(1)} %, radius scatter under ${(options.maxRadiusRms * 100).toFixed(2)} % RMS over ${options.windowSamples} samples`;
  if (raised === 0) return [`${MODEL_WATCH_ALARM}: none (the signal stayed within the calibration's model; ${bound})`];
  const first = events.find((event) => event.state === 'raised')!;
  const what = first.cause === 'radius-change' ? `the mean radius moved by ${(first.value * 100).toFixed(2)} %` : `the radius scattered ${(first.value * 100).toFixed(2)} % RMS`;
  return [
    `${MODEL_WATCH_ALARM} ×${raised}: the signal left the calibration's model (first at t = ${(first.sampleIndex / run.info.rateHz).toFixed(3)} s: ${what}; ${bound})` +
      `${activeAtEnd ? ', still at the end' : ''}: recalibrate, or check the source power and alignment`,
  ];
}

/** What the ellipse misses, in the summary's words, with what it could mean for position in nm. */
export function formatResidual(run: CaptureAnalysis): string[] {
  const { summary } = run.residual;
  const meaning = residualMeaning(summary, run.metresPerRad);
  const nm = (m: number) => (m * 1e9).toFixed(2);
  const percent = (value: number) => (value * 100).toFixed(3);
  if (meaning.largestOrder === 0) {
    return [`residual    too little of the fringe (${(summary.binCoverage * 100).toFixed(0)} % of the phase bins) to tell the radius harmonics or drift`];
  }
  const lines = [
    `residual    radius harmonics 1–8 (% of the radius): ${summary.radiusHarmonics.map(percent).join(' ')}`,
    `            largest: order ${meaning.largestOrder}, ${percent(meaning.largestRelative)} %; from a ghost beam or detector nonlinearity it could mean up to ±${nm(meaning.harmonicPositionM)} nm of periodic error the ellipse cannot correct`,
    `drift       mean radius moved by ${percent(summary.radiusDriftRelative)} % over the capture (phase-locked part removed); if the offsets moved with it, up to ${nm(meaning.driftPositionM)} nm`,
    `noise       radius ${percent(summary.radiusNoiseRms)} % RMS per sample, spectral slope ${summary.noiseSpectralSlope.toFixed(2)} (${meaning.noiseColour === 'red' ? 'red: correlated, averages down slower than white noise' : meaning.noiseColour === 'blue' ? 'blue' : meaning.noiseColour === 'white' ? 'white' : 'unknown'})`,
    `offset      a once-per-fringe change of the amplitude locked to the phase looks exactly like an offset to the fit: the data cannot tell them apart (check against a reference if the amplitude can vary once per period)`,
  ];
  return lines;
}

/** The comparison with a truth file, with its file name. */
export type TruthResult = TruthComparisonSummary & { readonly file: string };

export function formatTruthError(truth: TruthResult): string[] {
  if (truth.samples === 0) return [`against the truth ${truth.file}: no sample times in common`];
  const p = truth.periodic;
  return [
    `against the truth ${truth.file} (${truth.samples} samples):`,
    `  error     max ${nm(truth.maxAbsErrorM)} nm, RMS ${nm(truth.rmsErrorM)} nm`,
    `  trend     offset ${nm(truth.trend.offsetM)} nm, scale ${sig(truth.trend.scaleError * 1e6, 3)} ppm`,
    `  periodic  p-p ${nm(p.peakToPeakM)} nm, 1st harmonic ${nm(p.firstHarmonicM)} nm, 2nd harmonic ${nm(p.secondHarmonicM)} nm ` +
      `(after removing the trend; ${(p.binCoverage * 100).toFixed(0)} % of the phase bins)`,
  ];
}
