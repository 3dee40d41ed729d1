// Text summaries and the self-contained HTML report (plain inline SVG, no scripts, no network) of calibrate and replay.
import { writeFile, rename } from 'node:fs/promises';
import { alarmNames, alarmKinds, MODEL_WATCH_ALARM, residualMeaning, type AlarmKind, type EllipseCalibration, type EllipseFitResult } from '../src/core/index.js';
import type { Envelope, PeriodicErrorResult, RunResult } from './capture-run.js';
import type { MeasureSettings } from './capture-run.js';
import type { UncertaintyBudget } from '../src/core/index.js';
import { LASER_CAUTION } from './cli-kit.js';

const nm = (metres: number) => (metres * 1e9).toFixed(3);

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

function periodicRow(label: string, result: PeriodicErrorResult, metresPerRad: number): string {
  const s = result.summary;
  if (s.samples === 0) return `${label}  no stretch of motion that a cubic in time follows over 512 samples, with a clean signal, to measure it`;
  return (
    `${label}  p-p ${nm(s.peakToPeakRad * metresPerRad)} nm, RMS ${nm(s.rmsRad * metresPerRad)} nm, ` +
    `1st harmonic ${nm(s.firstHarmonicRad * metresPerRad)} nm, 2nd harmonic ${nm(s.secondHarmonicRad * metresPerRad)} nm ` +
    `(${s.samples} samples, ${(s.binCoverage * 100).toFixed(0)} % of the phase bins)`
  );
}

export function formatPeriodicError(run: RunResult): string[] {
  return [
    'periodic error (amplitudes of the harmonics; p-p and RMS of the phase-binned mean):',
    run.beforeNotApplicable === null ? periodicRow('  before', run.before, run.metresPerRad) : `  before  not applicable: ${run.beforeNotApplicable}`,
    periodicRow('  after ', run.after, run.metresPerRad),
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
export function formatResidual(run: RunResult): string[] {
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

export interface ReportInput {
  readonly title: string;
  readonly calibration: EllipseCalibration;
  readonly fit: EllipseFitResult | null;
  readonly run: RunResult;
  readonly settings: MeasureSettings;
  readonly notes: readonly string[];
  /** The GUM budget of the final reading, or null when no environment was given. */
  readonly budget: UncertaintyBudget | null;
}

const escape = (text: string) => text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');

function niceRange(values: ArrayLike<number> & Iterable<number>): [number, number] {
  let low = Infinity;
  let high = -Infinity;
  for (const value of values) {
    if (!Number.isFinite(value)) continue;
    if (value < low) low = value;
    if (value > high) high = value;
  }
  if (!Number.isFinite(low)) return [0, 1];
  if (low === high) return [low - 1, high + 1];
  const pad = (high - low) * 0.05;
  return [low - pad, high + pad];
}

interface Frame {
  readonly width: number;
  readonly height: number;
  readonly left: number;
  readonly bottom: number;
  readonly x: [number, number];
  readonly y: [number, number];
}

const px = (frame: Frame, value: number) =>
  frame.left + ((value - frame.x[0]) / (frame.x[1] - frame.x[0])) * (frame.width - frame.left - 10);
const py = (frame: Frame, value: number) =>
  frame.height - frame.bottom - ((value - frame.y[0]) / (frame.y[1] - frame.y[0])) * (frame.height - frame.bottom - 10);

function axes(frame: Frame, xLabel: string, yLabel: string): string {
  const ticks = (range: [number, number]) => [0, 0.25, 0.5, 0.75, 1].map((f) => range[0] + f * (range[1] - range[0]));
  const xTicks = ticks(frame.x)
    .map((v) => `<text x="${px(frame, v).toFixed(1)}" y="${frame.height - frame.bottom + 14}" text-anchor="middle">${v.toPrecision(3)}</text>`)
    .join('');
  const yTicks = ticks(frame.y)
    .map((v) => `<text x="${frame.left - 4}" y="${(py(frame, v) + 4).toFixed(1)}" text-anchor="end">${v.toPrecision(3)}</text>`)
    .join('');
  return (
    `<rect x="${frame.left}" y="10" width="${frame.width - frame.left - 10}" height="${frame.height - frame.bottom - 10}" class="plot-area"/>` +
    xTicks +
    yTicks +
    `<text x="${(frame.left + frame.width) / 2}" y="${frame.height - 4}" text-anchor="middle">${escape(xLabel)}</text>` +
    `<text x="10" y="${(frame.height - frame.bottom) / 2}" transform="rotate(-90 10 ${(frame.height - frame.bottom) / 2})" text-anchor="middle">${escape(yLabel)}</text>`
  );
}

function svg(frame: Frame, body: string, label: string): string {
  return `<svg class="plot" role="img" aria-label="${escape(label)}" viewBox="0 0 ${frame.width} ${frame.height}" width="${frame.width}" height="${frame.height}">${body}</svg>`;
}

function scatter(title: string, xs: Float64Array, ys: Float64Array, curve: Array<[number, number]>, xLabel: string, yLabel: string): string {
  const [x0, x1] = niceRange([...xs, ...curve.map((p) => p[0])]);
  const [y0, y1] = niceRange([...ys, ...curve.map((p) => p[1])]);
  // Equal scales on both axes: a circle must look like one.
  const span = Math.max(x1 - x0, y1 - y0);
  const cx = (x0 + x1) / 2;
  const cy = (y0 + y1) / 2;
  const frame: Frame = { width: 390, height: 380, left: 66, bottom: 34, x: [cx - span / 2, cx + span / 2], y: [cy - span / 2, cy + span / 2] };
  const dots = Array.from(xs, (x, k) => `M${px(frame, x).toFixed(1)} ${py(frame, ys[k]!).toFixed(1)}h0.1`).join('');
  const line = curve.map(([x, y], k) => `${k === 0 ? 'M' : 'L'}${px(frame, x).toFixed(1)} ${py(frame, y).toFixed(1)}`).join('') + 'Z';
  return svg(frame, axes(frame, xLabel, yLabel) + `<path class="samples" d="${dots}"/><path class="model" d="${line}"/>`, title);
}

function ellipseCurve(c: EllipseCalibration): Array<[number, number]> {
  return Array.from({ length: 121 }, (_, k) => {
    const phi = (k / 120) * 2 * Math.PI;
    return [c.amplitudeX * Math.cos(phi) + c.offsetX, c.amplitudeY * Math.sin(phi + c.phaseErrorRad) + c.offsetY] as [number, number];
  });
}

const unitCircle = Array.from({ length: 121 }, (_, k) => [Math.cos((k / 120) * 2 * Math.PI), Math.sin((k / 120) * 2 * Math.PI)] as [number, number]);

function periodicPlot(before: PeriodicErrorResult, after: PeriodicErrorResult): string {
  const bins = before.binnedM.length;
  const centre = (b: number) => ((b + 0.5) / bins) * 360;
  const toNm = (values: Float64Array) => {
    const finite = Array.from(values).filter(Number.isFinite);
    const mean = finite.reduce((a, b) => a + b, 0) / Math.max(1, finite.length);
    return Array.from(values, (v) => (v - mean) * 1e9);
  };
  const b = toNm(before.binnedM);
  const a = toNm(after.binnedM);
  const frame: Frame = { width: 560, height: 300, left: 60, bottom: 34, x: [0, 360], y: niceRange([...b, ...a]) };
  const path = (values: number[]) =>
    values
      .map((v, k) => (Number.isFinite(v) ? `${k === 0 || !Number.isFinite(values[k - 1]!) ? 'M' : 'L'}${px(frame, centre(k)).toFixed(1)} ${py(frame, v).toFixed(1)}` : ''))
      .join('');
  return svg(
    frame,
    axes(frame, 'fringe phase (degrees)', 'periodic error (nm)') +
      `<path class="before" d="${path(b)}"/><path class="after" d="${path(a)}"/>` +
      `<text x="${frame.width - 150}" y="28" class="before-label">before correction</text>` +
      `<text x="${frame.width - 150}" y="44" class="after-label">after correction</text>`,
    'periodic error against phase',
  );
}

/** Span colours, shared by the SVG fills and the legend. */
const ALARM_COLOUR: Record<AlarmKind, string> = {
  lowSignal: '#ecc94b66',
  saturation: '#ed893666',
  badSample: '#80808066',
  overspeed: '#9f7aea66',
  inputGap: '#4a556866',
  countLost: '#e53e3e55',
  lowPower: '#3182ce55',
};

const ALARM_CLASS: Record<AlarmKind, string> = {
  lowSignal: 'span-low',
  saturation: 'span-sat',
  badSample: 'span-bad',
  overspeed: 'span-over',
  inputGap: 'span-gap',
  countLost: 'span-lost',
  lowPower: 'span-power',
};

function timePlot(series: Envelope, scale: number, yLabel: string, run: RunResult, label: string): string {
  const endS = series.t.length > 0 ? series.t[series.t.length - 1]! : 1;
  const times = Array.from(series.t);
  const frame: Frame = {
    width: 760,
    height: 260,
    left: 70,
    bottom: 34,
    x: [0, Math.max(endS, 1e-9)],
    y: niceRange([...Array.from(series.min, (v) => v * scale), ...Array.from(series.max, (v) => v * scale)]),
  };
  const spans = run.alarmSpans
    .map((span) => {
      const start = px(frame, span.startS);
      const end = px(frame, Number.isNaN(span.endS) ? endS : span.endS);
      return `<rect class="${ALARM_CLASS[span.kind]}" x="${start.toFixed(1)}" y="10" width="${Math.max(1, end - start).toFixed(1)}" height="${frame.height - frame.bottom - 10}"><title>${alarmNames[span.kind]}</title></rect>`;
    })
    .join('');
  const upper = times.map((t, k) => `${k === 0 ? 'M' : 'L'}${px(frame, t).toFixed(1)} ${py(frame, series.max[k]! * scale).toFixed(1)}`).join('');
  const lower = times
    .map((t, k) => `L${px(frame, t).toFixed(1)} ${py(frame, series.min[k]! * scale).toFixed(1)}`)
    .reverse()
    .join('');
  return svg(frame, axes(frame, 'time (s)', yLabel) + spans + `<path class="trace" d="${upper}${lower}Z"/>`, label);
}

export function reportHtml(input: ReportInput): string {
  const { run, calibration, fit, settings: scale } = input;
  const rows: Array<[string, string]> = [
    ['capture', `${run.info.file} (${run.info.format}, ${run.samples} samples at ${run.info.rateHz} Hz, ${run.info.sampleEncoding})`],
    ['vacuum wavelength', `${(scale.wavelengthM * 1e9).toFixed(4)} nm`],
    ['fold', String(scale.fold)],
    ['refractive index', `${scale.refractiveIndex}${input.notes.some((n) => n.includes('n = 1')) ? ' (default: vacuum wavelength used)' : ''}`],
    ['offsetX, offsetY', `${calibration.offsetX.toFixed(3)}, ${calibration.offsetY.toFixed(3)}`],
    ['amplitudeX, amplitudeY', `${calibration.amplitudeX.toFixed(3)}, ${calibration.amplitudeY.toFixed(3)}`],
    ['phaseErrorRad', calibration.phaseErrorRad.toFixed(6)],
  ];
  if (fit !== null && fit.ok) {
    rows.push(['fit residual', `${(fit.residualRms * 100).toFixed(3)} % of the radius`]);
    rows.push(['phase coverage', `${fit.coverage.toFixed(3)} of a fringe`]);
  }
  const pe = (label: string, r: PeriodicErrorResult) => {
    const s = r.summary;
    rows.push([
      `periodic error ${label}`,
      label === 'before' && run.beforeNotApplicable !== null
        ? `not applicable: ${run.beforeNotApplicable}`
        : s.samples === 0
        ? 'not measured (no clean motion that a cubic follows over 512 samples)'
        : `p-p ${nm(s.peakToPeakRad * run.metresPerRad)} nm, RMS ${nm(s.rmsRad * run.metresPerRad)} nm, 1st ${nm(s.firstHarmonicRad * run.metresPerRad)} nm, 2nd ${nm(s.secondHarmonicRad * run.metresPerRad)} nm`,
    ]);
  };
  pe('before', run.before);
  pe('after', run.after);
  rows.push(['final position', `${(run.finalPositionM * 1e6).toFixed(6)} µm${run.countLostAtEnd ? ' — COUNT LOST: not trustworthy' : ''}`]);
  rows.push(['unambiguous speed limit', `${run.speedLimits.unambiguousMS.toPrecision(4)} m/s (overspeed alarm at ${run.speedLimits.overspeedMS.toPrecision(4)} m/s)`]);
  rows.push(['alarms raised', alarmKinds.map((kind) => `${alarmNames[kind]} ${run.alarmCounts[kind]}`).join(', ')]);
  if (input.budget !== null) {
    rows.push([
      'uncertainty of the final reading',
      `u = ${nm(input.budget.combinedStandardUncertaintyM)} nm, U = ${nm(input.budget.expandedUncertaintyM)} nm (k = ${input.budget.coverageFactor})`,
    ]);
  }
  const table = rows.map(([k, v]) => `<tr><th>${escape(k)}</th><td>${escape(v)}</td></tr>`).join('');
  const legend = alarmKinds.map((kind) => `<span class="key ${ALARM_CLASS[kind]}"></span>${alarmNames[kind]}`).join(' ');
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>${escape(input.title)}</title>
<style>
body { font: 14px/1.4 system-ui, sans-serif; margin: 24px; color: #1c1c1c; background: #fafafa; }
h1 { font-size: 20px; } h2 { font-size: 16px; margin-top: 28px; }
table { border-collapse: collapse; } th, td { text-align: left; padding: 3px 12px 3px 0; vertical-align: top; } th { font-weight: 600; }
.plot { background: #fff; margin: 6px 12px 6px 0; } .plot text { font-size: 11px; fill: #333; }
.plot-area { fill: none; stroke: #999; }
.samples { stroke: #2b6cb0; stroke-width: 3; stroke-linecap: round; } .model { fill: none; stroke: #c05621; stroke-width: 1; stroke-dasharray: 4 3; }
.before { fill: none; stroke: #c05621; stroke-width: 2; } .after { fill: none; stroke: #2f855a; stroke-width: 2; }
.before-label { fill: #c05621 !important; } .after-label { fill: #2f855a !important; }
.trace { fill: #2b6cb0; stroke: #2b6cb0; stroke-width: 1; }
${alarmKinds.map((kind) => `.${ALARM_CLASS[kind]} { fill: ${ALARM_COLOUR[kind]}; background: ${ALARM_COLOUR[kind]}; }`).join(' ')}
.key { display: inline-block; width: 12px; height: 12px; margin: 0 4px 0 10px; vertical-align: middle; }
.caution { border-left: 4px solid #c05621; padding: 6px 12px; background: #fff; max-width: 760px; }
</style></head><body>
<h1>${escape(input.title)}</h1>
<table>${table}</table>
${input.notes.length > 0 ? `<p>${input.notes.map(escape).join('<br>')}</p>` : ''}
${input.budget === null ? '<p>No environment given: no uncertainty budget (the reading uses the vacuum wavelength; in air it reads about 270 ppm long).</p>' : budgetTable(input.budget)}
<h2>Lissajous figure</h2>
<div>${scatter('Lissajous figure before correction', run.report.raw.x, run.report.raw.y, ellipseCurve(calibration), 'x (capture units)', 'y (capture units)')}${scatter('Lissajous figure after correction', run.report.corrected.x, run.report.corrected.y, unitCircle, 'u = cos φ', 'v = sin φ')}</div>
<p>Left: raw samples with the fitted ellipse. Right: corrected samples with the unit circle.</p>
<h2>Periodic error against phase</h2>
${periodicPlot(run.before, run.after)}
<h2>Position and velocity</h2>
<p>Shaded spans: ${legend}</p>
${timePlot(run.report.position, 1e6, 'position (µm)', run, 'position against time')}
${timePlot(run.report.velocity, 1e3, 'velocity (mm/s)', run, 'velocity against time')}
<p class="caution">${escape(LASER_CAUTION).replace(/\n/g, '<br>')}</p>
</body></html>
`;
}

/** The GUM budget as a table: the law of propagation with uncorrelated inputs. */
function budgetTable(budget: UncertaintyBudget): string {
  const rows = budget.contributions
    .map(
      (row) =>
        `<tr><td>${escape(row.name)}</td><td>${row.standardUncertainty.toPrecision(3)} ${escape(row.unit)}</td>` +
        `<td>${row.sensitivity.toPrecision(3)} ${escape(row.sensitivityUnit)}</td><td>${nm(row.contributionM)}</td></tr>`,
    )
    .join('');
  return `<h2>Uncertainty budget of the final reading (GUM, inputs uncorrelated)</h2>
<table class="budget"><tr><th>input</th><th>standard uncertainty</th><th>sensitivity</th><th>contribution (nm)</th></tr>${rows}
<tr><th>combined standard uncertainty</th><td></td><td></td><th>${nm(budget.combinedStandardUncertaintyM)}</th></tr>
<tr><th>expanded uncertainty (k = ${budget.coverageFactor})</th><td></td><td></td><th>${nm(budget.expandedUncertaintyM)}</th></tr></table>`;
}

export async function writeReportFile(path: string, input: ReportInput): Promise<void> {
  const temporary = `${path}.partial-${process.pid}`;
  await writeFile(temporary, reportHtml(input));
  await rename(temporary, path);
}
