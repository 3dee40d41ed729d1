// The self-contained HTML report of calibrate and replay: inline SVG drawn when the report is written, no scripts,
// no network. The commands load it only for --report (their text summaries are in summary.ts).
//
// The charts are tools/chart.ts's (d3-scale axes, shared with the spectrum and positioning reports).
// Alarm colours are the Okabe–Ito palette (M. Okabe and K. Ito, "Color Universal Design (CUD): how to make figures
// and presentations that are friendly to colorblind people", J*FLY, 2008), distinguishable under the common
// colour-vision deficiencies; each alarm has a labelled lane of its own, so overlapping spans never blend.
import {
  alarmKinds,
  alarmNames,
  residualMeaning,
  type AlarmKind,
  type EllipseCalibration,
  type EllipseFitResult,
} from '../src/core/index.js';
import { writeFileAtomically } from '../src/io/capture/index.js';
import type { Envelope, PeriodicErrorResult, RunResult } from './capture-run.js';
import type { MeasureSettings } from './capture-run.js';
import type { UncertaintyBudget } from '../src/core/index.js';
import { chart, escapeHtml as escape, extent, FONT_PX, polyline, type Scale } from './chart.js';
import { LASER_CAUTION, toolVersion } from './cli-kit.js';
import { analysedShare, nm, notMeasuredBefore, sig, type TruthResult } from './summary.js';

/** An amplitude spectral density of position. */
export interface PositionSpectrum {
  readonly frequencyHz: Float64Array;
  /** m/√Hz */
  readonly asd: Float64Array;
  readonly segments: number;
  readonly segmentSamples: number;
  readonly binWidthHz: number;
}

/** Where the report came from: printed in its header. */
export interface Provenance {
  readonly commandLine: readonly string[];
  /** SHA-256 of the capture, hex. */
  readonly inputHash: string;
  /** The calibration's origin: a file with its hash, or "fitted to this capture". */
  readonly calibrationSource: string;
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
  readonly provenance: Provenance;
  readonly truth?: TruthResult | null;
  readonly spectrum?: PositionSpectrum | null;
  /** The report's date; default now. */
  readonly date?: Date;
}

function lissajous(label: string, xs: Float64Array, ys: Float64Array, curve: Array<[number, number]>, xLabel: string, yLabel: string): string {
  const [x0, x1] = extent(xs, curve.map((p) => p[0]));
  const [y0, y1] = extent(ys, curve.map((p) => p[1]));
  // Equal scales on both axes: the same span around each centre, 5 % margin.
  const half = (Math.max(x1 - x0, y1 - y0) / 2) * 1.05;
  const cx = (x0 + x1) / 2;
  const cy = (y0 + y1) / 2;
  return chart({
    label,
    width: 420,
    plotHeight: 320,
    square: true,
    x: { label: xLabel, domain: [cx - half, cx + half], nice: false, ticks: 5 },
    y: { label: yLabel, domain: [cy - half, cy + half], nice: false, ticks: 5 },
    body: (sx, sy) => {
      const dots = Array.from(xs, (x, k) => `M${sx(x).toFixed(1)} ${sy(ys[k]!).toFixed(1)}h0.1`).join('');
      const line = curve.map(([x, y], k) => `${k === 0 ? 'M' : 'L'}${sx(x).toFixed(1)} ${sy(y).toFixed(1)}`).join('') + 'Z';
      return `<path class="samples" d="${dots}"/><path class="model" d="${line}"/>`;
    },
  });
}

function ellipseCurve(c: EllipseCalibration): Array<[number, number]> {
  return Array.from({ length: 121 }, (_, k) => {
    const phi = (k / 120) * 2 * Math.PI;
    return [c.amplitudeX * Math.cos(phi) + c.offsetX, c.amplitudeY * Math.sin(phi + c.phaseErrorRad) + c.offsetY] as [number, number];
  });
}

const unitCircle = Array.from({ length: 121 }, (_, k) => [Math.cos((k / 120) * 2 * Math.PI), Math.sin((k / 120) * 2 * Math.PI)] as [number, number]);

const measured = (result: PeriodicErrorResult) => result.summary.samples > 0;

/** Fringe phase in degrees, labelled every 45°. */
const PHASE_TICKS = [-180, -135, -90, -45, 0, 45, 90, 135, 180];

/** The corrected radius against the corrected phase, its mean over the bins removed: what the ellipse leaves. */
function residualPhasePlot(byPhase: Float64Array): string {
  const bins = byPhase.length;
  const finite = Array.from(byPhase).filter(Number.isFinite);
  const mean = finite.reduce((a, b) => a + b, 0) / Math.max(1, finite.length);
  const percent = Float64Array.from(byPhase, (r) => (r - mean) * 100);
  return chart({
    label: 'radius residual against phase',
    width: 640,
    plotHeight: 220,
    x: { label: 'corrected phase (degrees)', domain: [-180, 180], nice: false, values: PHASE_TICKS },
    y: { label: 'radius residual (%)', domain: extent(percent) },
    body: (sx, sy) => `<path class="residual" d="${polyline((k) => -180 + ((k + 0.5) / bins) * 360, percent, sx, sy)}"/>`,
  });
}

/** The mean corrected radius per time segment (the part locked to the phase removed): slow drift. */
function radiusTimePlot(run: RunResult, endS: number): string {
  const { sampleIndex, samples, meanRadius } = run.residual.overTime;
  const percent = Float64Array.from(meanRadius, (r) => (r - 1) * 100);
  const t = (k: number) => (sampleIndex[k]! + samples[k]! / 2) / run.info.rateHz;
  return chart({
    label: 'radius against time',
    width: 900,
    plotHeight: 200,
    x: { label: 'time (s)', domain: [0, Math.max(endS, 1e-9)] },
    y: { label: 'mean radius − 1 (%)', domain: extent(percent) },
    body: (sx, sy) => `<path class="residual" d="${polyline(t, percent, sx, sy)}"/>`,
  });
}

/** What the radius plots could mean for position, under the ghost-beam model of residual.ts. */
function residualCaption(run: RunResult): { phase: string; time: string } {
  const { summary } = run.residual;
  const meaning = residualMeaning(summary, run.metresPerRad);
  const nm2 = (m: number) => (m * 1e9).toFixed(2);
  if (meaning.largestOrder === 0) {
    const why = `too little of the fringe (${(summary.binCoverage * 100).toFixed(0)} % of the phase bins) to state it`;
    return { phase: `Radius harmonics: ${why}.`, time: `Drift: ${why}.` };
  }
  const pair = run.power === null ? '' : ' These are of the power-normalised pair: source power changes are removed before them.';
  return {
    phase:
      `Largest radius harmonic: order ${meaning.largestOrder}, ${(meaning.largestRelative * 100).toFixed(3)} % of the radius. From a ghost beam or a detector ` +
      `nonlinearity it could mean up to ±${nm2(meaning.harmonicPositionM)} nm of periodic error in position that the ellipse cannot correct (calibrate --harmonics). ` +
      `A once-per-fringe change (order 1) looks exactly like an offset to the fit: the data cannot tell them apart.${pair}`,
    time: `The mean radius moved by ${(summary.radiusDriftRelative * 100).toFixed(3)} % over the capture; if the offsets moved with it, that could mean up to ${nm2(meaning.driftPositionM)} nm of position error.${pair}`,
  };
}

const legend = (entries: Array<[string, string]>) => `<p class="legend">${entries.map(([cls, text]) => `<span class="key ${cls}"></span>${escape(text)}`).join(' ')}</p>`;

/** The periodic-error plot with its legend; a curve left out (not applicable, not measured) is named with the reason. */
function periodicSection(run: RunResult): string {
  const beforeShown = run.beforeNotApplicable === null && measured(run.before);
  const afterShown = run.afterNotMeasured === null && measured(run.after);
  const reasons = [
    ...(run.beforeNotApplicable === null ? [] : [`Before correction: not applicable: ${run.beforeNotApplicable}.`]),
    ...(run.afterNotMeasured === null ? [] : [`After correction: ${run.afterNotMeasured}.`]),
  ].map((text) => `<p>${escape(text)}</p>`);
  if (!beforeShown && !afterShown) return reasons.join('');
  const keys: Array<[string, string]> = [...(beforeShown ? [['before', 'before correction'] as [string, string]] : []), ...(afterShown ? [['after', 'after correction'] as [string, string]] : [])];
  return reasons.join('') + legend(keys) + periodicPlot(run.before, run.after, beforeShown, afterShown);
}

function periodicPlot(before: PeriodicErrorResult, after: PeriodicErrorResult, beforeShown: boolean, afterShown: boolean): string {
  const bins = before.binnedM.length;
  const centre = (b: number) => ((b + 0.5) / bins) * 360;
  const toNm = (values: Float64Array) => {
    const finite = Array.from(values).filter(Number.isFinite);
    const mean = finite.reduce((a, b) => a + b, 0) / Math.max(1, finite.length);
    return Float64Array.from(values, (v) => (v - mean) * 1e9);
  };
  const b = beforeShown ? toNm(before.binnedM) : new Float64Array(0);
  const a = afterShown ? toNm(after.binnedM) : new Float64Array(0);
  return chart({
    label: 'periodic error against phase',
    width: 640,
    plotHeight: 240,
    x: { label: 'fringe phase (degrees)', domain: [0, 360], nice: false, values: [0, 45, 90, 135, 180, 225, 270, 315, 360] },
    y: { label: 'periodic error (nm)', domain: extent(b, a) },
    body: (sx, sy) =>
      (b.length > 0 ? `<path class="before" d="${polyline(centre, b, sx, sy)}"/>` : '') + (a.length > 0 ? `<path class="after" d="${polyline(centre, a, sx, sy)}"/>` : ''),
  });
}

/** Okabe–Ito colours (see the head of this file), one per alarm; black for the gravest, a lost count. */
const ALARM_COLOUR: Record<AlarmKind, string> = {
  lowSignal: '#E69F00', // orange
  saturation: '#D55E00', // vermillion
  badSample: '#CC79A7', // reddish purple
  overspeed: '#0072B2', // blue
  inputGap: '#009E73', // bluish green
  countLost: '#000000', // black
  lowPower: '#56B4E9', // sky blue
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

const LANE_PX = 18;

/**
 * The series re-binned to one min/max pair per pixel column of the plot: a long capture draws as the band its
 * values covered in each column, never as overlapping strokes.
 */
function columnEnvelope(series: Envelope, scale: number, sx: Scale, left: number, columns: number) {
  const low = new Float64Array(columns).fill(Infinity);
  const high = new Float64Array(columns).fill(-Infinity);
  for (let k = 0; k < series.t.length; k++) {
    const column = Math.min(columns - 1, Math.max(0, Math.floor(sx(series.t[k]!) - left)));
    const a = series.min[k]! * scale;
    const b = series.max[k]! * scale;
    if (a < low[column]!) low[column] = a;
    if (b > high[column]!) high[column] = b;
  }
  return { low, high };
}

function timePlot(series: Envelope, scale: number, yLabel: string, run: RunResult, label: string, endS: number): string {
  const kinds = alarmKinds.filter((kind) => run.alarmCounts[kind] > 0);
  return chart({
    className: 'time',
    label,
    width: 900,
    plotHeight: 220,
    x: { label: 'time (s)', domain: [0, Math.max(endS, 1e-9)] },
    y: { label: yLabel, domain: extent(Float64Array.from(series.min, (v) => v * scale), Float64Array.from(series.max, (v) => v * scale)) },
    body: (sx, sy, plot) => {
      const columns = Math.max(1, Math.round(plot.width));
      const { low, high } = columnEnvelope(series, scale, sx, plot.left, columns);
      let upper = '';
      let lower = '';
      for (let c = 0; c < columns; c++) {
        if (!(high[c]! >= low[c]!)) continue;
        const x = (plot.left + c + 0.5).toFixed(1);
        // At least one pixel tall, so a flat stretch still shows.
        const top = sy(high[c]!);
        const bottom = Math.max(sy(low[c]!), top + 1);
        upper += `${upper === '' ? 'M' : 'L'}${x} ${top.toFixed(1)}`;
        lower = `L${x} ${bottom.toFixed(1)}` + lower;
      }
      return upper === '' ? '' : `<path class="trace" d="${upper}${lower}Z"/>`;
    },
    marginLabels: kinds.map((kind) => alarmNames[kind]),
    belowHeight: kinds.length * LANE_PX + (kinds.length > 0 ? 6 : 0),
    below: (sx, plot, y0) =>
      kinds
        .map((kind, lane) => {
          const y = y0 + lane * LANE_PX;
          const spans = run.alarmSpans
            .filter((span) => span.kind === kind)
            .map((span) => {
              const start = sx(span.startS);
              const end = sx(Number.isNaN(span.endS) ? endS : span.endS);
              return `<rect class="${ALARM_CLASS[kind]}" x="${start.toFixed(1)}" y="${y + 2}" width="${Math.max(1.5, end - start).toFixed(1)}" height="${LANE_PX - 4}"><title>${alarmNames[kind]} ${sig(span.startS)}–${Number.isNaN(span.endS) ? 'end' : sig(span.endS)} s</title></rect>`;
            })
            .join('');
          return (
            `<rect class="lane" x="${plot.left}" y="${y + 1}" width="${plot.width}" height="${LANE_PX - 2}"/>` +
            spans +
            `<text class="lane-label" x="${plot.left - 6}" y="${y + LANE_PX / 2 + 4}" text-anchor="end">${alarmNames[kind]}</text>`
          );
        })
        .join(''),
  });
}

function spectrumPlot(spectrum: PositionSpectrum): string {
  const f: number[] = [];
  const a: number[] = [];
  for (let k = 1; k < spectrum.frequencyHz.length; k++) {
    const value = spectrum.asd[k]! * 1e9;
    if (value > 0 && Number.isFinite(value)) {
      f.push(spectrum.frequencyHz[k]!);
      a.push(value);
    }
  }
  const [a0, a1] = extent(a);
  const [f0, f1] = extent(f);
  const decade = (value: number, up: boolean) => 10 ** (up ? Math.ceil(Math.log10(value)) : Math.floor(Math.log10(value)));
  return chart({
    label: 'amplitude spectral density of position',
    width: 640,
    plotHeight: 260,
    x: { label: 'frequency (Hz)', domain: [f0, f1], log: true },
    y: { label: 'ASD (nm/√Hz)', domain: [decade(a0, false), decade(a1, true)], log: true },
    body: (sx, sy) => `<path class="asd" d="${f.map((x, k) => `${k === 0 ? 'M' : 'L'}${sx(x).toFixed(1)} ${sy(a[k]!).toFixed(1)}`).join('')}"/>`,
  });
}

/** Arguments quoted for a POSIX shell where needed, so the line can be pasted back. */
function shellLine(args: readonly string[]): string {
  return args.map((arg) => (/^[\w@%+=:,./-]+$/.test(arg) ? arg : `'${arg.replace(/'/g, `'\\''`)}'`)).join(' ');
}

/** ISO 8601 in UTC, 24-hour: 2026-12-02 13:20:05 UTC. */
const isoUtc = (date: Date) => `${date.toISOString().slice(0, 19).replace('T', ' ')} UTC`;

export function reportHtml(input: ReportInput): string {
  const { run, calibration, fit, settings: scale, provenance } = input;
  const date = input.date ?? new Date();
  const header: Array<[string, string]> = [
    ['date', isoUtc(date)],
    ['tool', `fringetally ${toolVersion()}`],
    ['command line', shellLine(provenance.commandLine)],
    ['capture', `${run.info.file}`],
    ['capture SHA-256', provenance.inputHash],
    ['calibration', provenance.calibrationSource],
  ];
  const rows: Array<[string, string]> = [
    ['capture format', `${run.info.format}, ${run.samples} samples at ${sig(run.info.rateHz, 6)} Hz, ${run.info.sampleEncoding}`],
    ['vacuum wavelength', `${sig(scale.wavelengthM * 1e9, 8)} nm`],
    ['fold', sig(scale.fold)],
    ['refractive index', `${scale.refractiveIndex.toFixed(9)}${input.notes.some((n) => n.includes('n = 1')) ? ' (default: vacuum wavelength used)' : ''}`],
    ['offsetX, offsetY', `${sig(calibration.offsetX, 6)}, ${sig(calibration.offsetY, 6)}`],
    ['amplitudeX, amplitudeY', `${sig(calibration.amplitudeX, 6)}, ${sig(calibration.amplitudeY, 6)}`],
    ['phase error', `${sig(calibration.phaseErrorRad, 4)} rad`],
  ];
  if (fit !== null && fit.ok) {
    rows.push(['fit residual', `${sig(fit.residualRms * 100, 3)} % of the radius`]);
    rows.push(['phase coverage', `${fit.coverage.toFixed(3)} of a fringe`]);
  }
  const pe = (label: string, r: PeriodicErrorResult, notMeasured: string | null) => {
    const s = r.summary;
    rows.push([
      `periodic error ${label}`,
      notMeasured ??
        `p-p ${nm(s.peakToPeakRad * run.metresPerRad)} nm, RMS ${nm(s.rmsRad * run.metresPerRad)} nm, 1st ${nm(s.firstHarmonicRad * run.metresPerRad)} nm, 2nd ${nm(s.secondHarmonicRad * run.metresPerRad)} nm`,
    ]);
  };
  pe('before correction', run.before, run.beforeNotApplicable === null ? notMeasuredBefore(run) : `not applicable: ${run.beforeNotApplicable}`);
  pe('after correction', run.after, run.afterNotMeasured);
  if (run.analysedEvery > 1) rows.push(['periodic error and radius analysed on', analysedShare(run)]);
  rows.push(['final position', `${(run.finalPositionM * 1e6).toFixed(6)} µm${run.countLostAtEnd ? ' — COUNT LOST: not trustworthy' : ''}`]);
  rows.push(['unambiguous speed limit', `${sig(run.speedLimits.unambiguousMS)} m/s (overspeed alarm at ${sig(run.speedLimits.overspeedMS)} m/s)`]);
  rows.push(['alarms raised', alarmKinds.map((kind) => `${alarmNames[kind]} ${run.alarmCounts[kind]}`).join(', ')]);
  if (input.budget !== null) {
    rows.push(['uncertainty of the final reading', `u = ${nm(input.budget.combinedStandardUncertaintyM)} nm, U = ${nm(input.budget.expandedUncertaintyM)} nm (k = ${input.budget.coverageFactor})`]);
  }
  const truth = input.truth ?? null;
  if (truth !== null) {
    const p = truth.periodic;
    rows.push(['truth file', `${truth.file} (${truth.samples} samples compared)`]);
    if (truth.samples > 0) {
      rows.push(['error against the truth', `max ${nm(truth.maxAbsErrorM)} nm, RMS ${nm(truth.rmsErrorM)} nm`]);
      rows.push(['trend of the error', `offset ${nm(truth.trend.offsetM)} nm, scale ${sig(truth.trend.scaleError * 1e6, 3)} ppm`]);
      rows.push(['periodic error against the truth', `p-p ${nm(p.peakToPeakM)} nm, 1st ${nm(p.firstHarmonicM)} nm, 2nd ${nm(p.secondHarmonicM)} nm (trend removed)`]);
    }
  }
  const table = (entries: Array<[string, string]>, className: string) =>
    `<table class="${className}">${entries.map(([k, v]) => `<tr><th>${escape(k)}</th><td>${escape(v)}</td></tr>`).join('')}</table>`;
  const endS = run.samples / run.info.rateHz;
  const spectrum = input.spectrum ?? null;
  const caption = residualCaption(run);
  const power = run.report.power;
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1"><title>${escape(input.title)}</title>
<style>
body { font: 14px/1.4 system-ui, sans-serif; margin: 16px; color: #1c1c1c; background: #fafafa; max-width: 940px; }
h1 { font-size: 20px; } h2 { font-size: 16px; margin-top: 28px; }
table { border-collapse: collapse; } th, td { text-align: left; padding: 3px 12px 3px 0; vertical-align: top; } th { font-weight: 600; white-space: nowrap; }
td { overflow-wrap: anywhere; }
.header { background: #fff; border: 1px solid #ddd; padding: 6px 10px; display: block; }
.header td { font-family: ui-monospace, monospace; font-size: 13px; }
.plot { display: block; width: 100%; height: auto; background: #fff; margin: 6px 0; overflow: visible; }
.figures { display: flex; flex-wrap: wrap; gap: 12px; } .figures .plot { width: 420px; max-width: 100%; flex: 0 1 420px; }
.plot text { font-size: ${FONT_PX}px; fill: #333; } .plot .axis-label { font-size: 13px; }
.plot-area { fill: none; stroke: #999; } .grid { stroke: #eee; } .tick { stroke: #999; }
.samples { stroke: #0072B2; stroke-width: 3; stroke-linecap: round; } .model { fill: none; stroke: #D55E00; stroke-width: 1.2; stroke-dasharray: 4 3; }
.before { fill: none; stroke: #D55E00; stroke-width: 2; } .after { fill: none; stroke: #009E73; stroke-width: 2; }
.trace { fill: #0072B2; stroke: #0072B2; stroke-width: 0.6; stroke-linejoin: round; } .asd { fill: none; stroke: #0072B2; stroke-width: 1.2; }
.residual { fill: none; stroke: #0072B2; stroke-width: 1.5; }
.lane { fill: #f2f2f2; } .lane-label { font-size: 11px !important; }
${alarmKinds.map((kind) => `.${ALARM_CLASS[kind]} { fill: ${ALARM_COLOUR[kind]}; background: ${ALARM_COLOUR[kind]}; }`).join('\n')}
.key { display: inline-block; width: 14px; height: 10px; margin: 0 4px 0 12px; vertical-align: middle; }
.key.before { background: #D55E00; } .key.after { background: #009E73; } .key.samples { background: #0072B2; } .key.model { background: #D55E00; height: 2px; }
.caution { border-left: 4px solid #D55E00; padding: 6px 12px; background: #fff; }
</style></head><body>
<h1>${escape(input.title)}</h1>
${table(header, 'header')}
<h2>Results</h2>
${table(rows, 'results')}
${input.notes.length > 0 ? `<p>${input.notes.map(escape).join('<br>')}</p>` : ''}
${input.budget === null ? '<p>No environment given: no uncertainty budget (the reading uses the vacuum wavelength; in air it reads about 270 ppm long).</p>' : budgetTable(input.budget)}
<h2>Lissajous figures</h2>
${legend([['samples', 'samples'], ['model', 'fitted ellipse (left), unit circle (right)']])}
<div class="figures">${lissajous('Lissajous figure before correction', run.report.raw.x, run.report.raw.y, ellipseCurve(calibration), 'x (capture units)', 'y (capture units)')}${lissajous('Lissajous figure after correction', run.report.corrected.x, run.report.corrected.y, unitCircle, 'u = cos φ', 'v = sin φ')}</div>
<h2>Periodic error against phase</h2>
${periodicSection(run)}
<h2>Position and velocity</h2>
<p>Each pixel column shows the range of values in its time slice. Alarm lanes below each plot mark when an alarm was active (hover a span for its times).</p>
${timePlot(run.report.position, 1e6, 'position (µm)', run, 'position against time', endS)}
${timePlot(run.report.velocity, 1e3, 'velocity (mm/s)', run, 'velocity against time', endS)}
${power === null || run.power === null ? '' : `<h2>Source power</h2>
<p>The power of the source, removed sample by sample from the three or four outputs: ${run.power.min.toFixed(4)} to ${run.power.max.toFixed(4)}, mean ${run.power.mean.toFixed(4)} (1 = the calibration capture's mean).</p>
${timePlot(power, 1, 'source power (relative)', run, 'source power against time', endS)}`}
<h2>What the ellipse misses</h2>
<p>The corrected radius is 1 on the calibration's ellipse; what departs from it the ellipse did not model.</p>
${residualPhasePlot(run.residual.byPhase)}
<p>${escape(caption.phase)}</p>
${radiusTimePlot(run, endS)}
<p>${escape(caption.time)}</p>
${spectrum === null ? '' : `<h2>Amplitude spectral density of position</h2>
<p>Welch's averaged periodogram (P. D. Welch, IEEE Trans. Audio Electroacoust. 15(2), 70–73, 1967): ${spectrum.segments} Hann-windowed segments of ${spectrum.segmentSamples} samples, 50 % overlap, linear trend removed per segment; resolution ${sig(spectrum.binWidthHz, 3)} Hz.</p>
${spectrumPlot(spectrum)}`}
<p class="caution">${escape(LASER_CAUTION).replace(/\n/g, '<br>')}</p>
</body></html>
`;
}

/** The GUM budget as a table: the law of propagation with uncorrelated inputs. */
function budgetTable(budget: UncertaintyBudget): string {
  const rows = budget.contributions
    .map(
      (row) =>
        `<tr><td>${escape(row.name)}</td><td>${sig(row.standardUncertainty, 3)} ${escape(row.unit)}</td>` +
        `<td>${sig(row.sensitivity, 3)} ${escape(row.sensitivityUnit)}</td><td>${nm(row.contributionM)}</td></tr>`,
    )
    .join('');
  return `<h2>Uncertainty budget of the final reading (GUM, inputs uncorrelated)</h2>
<table class="budget"><tr><th>input</th><th>standard uncertainty</th><th>sensitivity</th><th>contribution (nm)</th></tr>${rows}
<tr><th>combined standard uncertainty</th><td></td><td></td><th>${nm(budget.combinedStandardUncertaintyM)}</th></tr>
<tr><th>expanded uncertainty (k = ${budget.coverageFactor})</th><td></td><td></td><th>${nm(budget.expandedUncertaintyM)}</th></tr></table>`;
}

export async function writeReportFile(path: string, input: ReportInput): Promise<void> {
  await writeFileAtomically(path, reportHtml(input));
}
