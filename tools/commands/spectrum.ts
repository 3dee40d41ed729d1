// `fringetally spectrum`: vibration and stability of a position record: amplitude spectral density (Welch),
// cumulative RMS, overlapping Allan deviation, and the periodic-error lines at a steady speed; CSV and a report.
import { rename, writeFile } from 'node:fs/promises';
import { createStabilityAnalyzer, lineRms, WELCH_DEFAULTS, type Detrend, type SpectralWindow, type StabilityAnalyzer, type StabilityResult } from '../../src/core/index.js';
import { LASER_CAUTION, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { factTable, lineChart, logDecimate, page } from '../chart.js';
import { readPositions, positionInputHelp, positionInputSpecs, type PositionInput } from '../position-input.js';
import { createProgress } from '../progress.js';

/** Longer than the library's segment: a capture's spectrum wants finer bins than a live one. */
const DEFAULT_SEGMENT_SAMPLES = 16384;

const help = `Usage: fringetally spectrum <capture> [--out spectrum.csv] [--allan-out allan.csv] [--report report.html] [options]

Vibration and stability of the measured position: its amplitude spectral density (Welch's averaged periodograms,
nm/√Hz), the cumulative RMS from the lowest frequency up (nm), and the overlapping Allan deviation of the position
against averaging time (nm). While the stage moves at a steady speed, the periodic error of the fringe
interpolation shows as lines at the fringe frequency and its multiples; they are located and marked.
Give at least one of --out, --allan-out and --report.

Output:
  --out FILE             spectrum CSV: frequency_hz, asd_nm_per_rthz, cumulative_rms_nm
  --allan-out FILE       Allan deviation CSV: tau_s, adev_nm, terms (squared differences averaged)
  --report FILE          self-contained HTML report with the three plots
  --quiet                no progress bar and no summary
Spectrum:
  --segment N            samples per segment, a power of two (default ${DEFAULT_SEGMENT_SAMPLES}; bin width = rate / N)
  --overlap F            overlap of consecutive segments, 0..0.95 (default ${WELCH_DEFAULTS.overlap})
  --window W             hann or rectangular (default ${WELCH_DEFAULTS.window})
  --detrend D            linear (removes a steady move per segment), mean or none (default ${WELCH_DEFAULTS.detrend})

${positionInputHelp}

${LASER_CAUTION}`;

const nm = (metres: number) => metres * 1e9;
const detrendText: Record<Detrend, string> = { linear: 'its least-squares line', mean: 'its mean', none: 'nothing' };

async function writeAtomically(path: string, text: string): Promise<void> {
  const temporary = `${path}.partial-${process.pid}`;
  await writeFile(temporary, text);
  await rename(temporary, path);
}

function spectrumCsv(result: StabilityResult): string {
  const { spectrum } = result;
  const head = [
    `# amplitude spectral density of position (Welch), ${spectrum.segments} segments, bin width ${spectrum.binWidthHz} Hz, ENBW ${spectrum.enbwHz} Hz`,
    ...Array.from(result.linesHz, (f, k) => `# periodic-error line ${k + 1}: ${f} Hz`),
    'frequency_hz,asd_nm_per_rthz,cumulative_rms_nm',
  ];
  const rows = Array.from(spectrum.frequencyHz, (f, k) => `${f},${nm(spectrum.asd[k]!).toPrecision(8)},${nm(result.cumulativeRmsM[k]!).toPrecision(8)}`);
  return [...head, ...rows].join('\n') + '\n';
}

function allanCsv(result: StabilityResult): string {
  const { allan } = result;
  const rows = Array.from(allan.tauS, (tau, k) => `${tau},${nm(allan.deviation[k]!).toPrecision(8)},${allan.terms[k]}`);
  return ['# overlapping Allan deviation of position', 'tau_s,adev_nm,terms', ...rows].join('\n') + '\n';
}

function reportHtml(path: string, input: PositionInput, result: StabilityResult, notes: readonly string[], detrend: Detrend): string {
  const { spectrum, allan, speed } = result;
  const totalRms = result.cumulativeRmsM[result.cumulativeRmsM.length - 1]!;
  const facts: Array<[string, string]> = [
    ['record', `${path} (${input.source === 'pipeline' ? 'raw capture through the pipeline' : 'positions as given'}, ${result.samples} samples at ${input.rateHz} Hz)`],
    ['segments', `${spectrum.segments} of ${spectrum.frequencyHz.length * 2 - 2} samples; bin width ${spectrum.binWidthHz.toPrecision(4)} Hz, ENBW ${spectrum.enbwHz.toPrecision(4)} Hz`],
    ['RMS (all frequencies)', `${nm(totalRms).toPrecision(4)} nm (of the detrended, windowed segments)`],
    ['speed', Number.isFinite(speed.meanMS) ? `${(speed.meanMS * 1e3).toPrecision(4)} mm/s mean, spread ${(speed.spread * 100).toPrecision(3)} % — ${speed.steady ? 'steady' : 'not steady'}` : 'not measured'],
  ];
  const lineRows = Array.from(result.linesHz, (f, k) => `<tr><td>${k + 1}× fringe</td><td>${f.toPrecision(6)}</td><td>${nm(lineRms(spectrum, f)).toPrecision(4)}</td><td>${nm(lineRms(spectrum, f) * Math.SQRT2).toPrecision(4)}</td></tr>`).join('');
  const lines =
    result.linesHz.length > 0
      ? `<table class="grid"><tr><th>line</th><th>frequency (Hz)</th><th>RMS (nm)</th><th>amplitude (nm)</th></tr>${lineRows}</table>`
      : `<p>No periodic-error lines marked: ${input.metresPerFringe === null ? 'the length per fringe is unknown (give --wavelength-nm and --fold)' : speed.steady ? 'the fringe frequency lies above the Nyquist frequency' : 'the speed was not steady (segment speeds spread by more than 5 %)'}.</p>`;
  // Labels on the first four only: higher multiples crowd together on a log axis.
  const markers = Array.from(result.linesHz, (f, k) => ({ x: f, label: k < 4 ? `${k + 1}×` : '' }));
  const asd = logDecimate(spectrum.frequencyHz, Array.from(spectrum.asd, nm), 3000);
  const cumulative = logDecimate(spectrum.frequencyHz, Array.from(result.cumulativeRmsM, nm), 3000);
  const body = `${factTable(facts)}
${notes.length > 0 ? `<p>${notes.map((n) => n.replace(/&/g, '&amp;').replace(/</g, '&lt;')).join('<br>')}</p>` : ''}
<h2>Amplitude spectral density of position</h2>
${lineChart([{ ...asd, label: 'ASD' }], { title: 'amplitude spectral density', xLabel: 'frequency (Hz)', yLabel: 'ASD (nm/√Hz)', xLog: true, yLog: true, markers })}
<h2>Periodic-error lines</h2>
${lines}
<h2>Cumulative RMS</h2>
${lineChart([{ ...cumulative, label: 'cumulative RMS' }], { title: 'cumulative RMS', xLabel: 'frequency (Hz)', yLabel: 'RMS below f (nm)', xLog: true, markers })}
<h2>Allan deviation of position</h2>
${lineChart([{ x: allan.tauS, y: Array.from(allan.deviation, nm), label: 'overlapping Allan deviation' }], { title: 'Allan deviation', xLabel: 'averaging time τ (s)', yLabel: 'σ(τ) (nm)', xLog: true, yLog: true })}
<h2>Methods</h2>
<p>Spectral density: Welch's method of averaged periodograms (P. D. Welch, IEEE Trans. Audio Electroacoust. AU-15, 1967),
one-sided, scaled as in Heinzel, Rüdiger and Schilling, "Spectrum and spectral density estimation by the DFT" (2002);
each segment loses ${detrendText[detrend]} before the window. Line RMS: the power within ±3 bins of the line.
Allan deviation: the overlapping estimator (D. W. Allan, Proc. IEEE 54, 1966; IEEE Std 1139) of the position samples;
long records are averaged pairwise to bound memory, so the shortest τ may exceed one sample period.</p>
<p class="caution">${LASER_CAUTION.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/\n/g, '<br>')}</p>`;
  return page(`Spectrum and stability of ${path}`, body);
}

async function run(argv: readonly string[]): Promise<number> {
  const parsed = parseCommandLine(
    argv,
    {
      out: { type: 'string' },
      'allan-out': { type: 'string' },
      report: { type: 'string' },
      quiet: { type: 'boolean' },
      segment: { type: 'string' },
      overlap: { type: 'string' },
      window: { type: 'string' },
      detrend: { type: 'string' },
      ...positionInputSpecs,
    },
    true,
  );
  const values = parsed.values;
  if (parsed.positionals.length !== 1) throw new UsageError('give exactly one capture file');
  const path = parsed.positionals[0]!;
  const out = values.out;
  const allanOut = values['allan-out'];
  const report = values.report;
  if (out === undefined && allanOut === undefined && report === undefined) throw new UsageError('give at least one of --out, --allan-out and --report');
  const segmentSamples = numberOption('segment', values.segment) ?? DEFAULT_SEGMENT_SAMPLES;
  if (!Number.isInteger(segmentSamples) || segmentSamples < 16 || (segmentSamples & (segmentSamples - 1)) !== 0) {
    throw new UsageError(`--segment must be a power of two of at least 16 samples (got ${values.segment})`);
  }
  const overlap = numberOption('overlap', values.overlap) ?? WELCH_DEFAULTS.overlap;
  if (!(overlap >= 0 && overlap <= 0.95)) throw new UsageError(`--overlap must be in 0..0.95 (got ${values.overlap})`);
  const window = values.window ?? WELCH_DEFAULTS.window;
  if (window !== 'hann' && window !== 'rectangular') throw new UsageError(`--window must be hann or rectangular (got "${window}")`);
  const detrend = values.detrend ?? WELCH_DEFAULTS.detrend;
  if (detrend !== 'linear' && detrend !== 'mean' && detrend !== 'none') throw new UsageError(`--detrend must be linear, mean or none (got "${detrend}")`);
  const quiet = values.quiet === true;
  const say = (line: string) => {
    if (!quiet) process.stderr.write(line + '\n');
  };

  let analyzer: StabilityAnalyzer | null = null;
  const input = await readPositions(path, values, createProgress(quiet), say, (start) => {
    const created = createStabilityAnalyzer({
      rateHz: start.rateHz,
      segmentSamples,
      overlap,
      window: window as SpectralWindow,
      detrend: detrend as Detrend,
      ...(start.metresPerFringe === null ? {} : { metresPerFringe: start.metresPerFringe }),
    });
    analyzer = created;
    return (positionM, length) => created.add(positionM, length);
  });
  const result = (analyzer as StabilityAnalyzer | null)?.result();
  if (result === undefined || result.spectrum.segments === 0) {
    throw new Error(`${path}: ${result?.samples ?? 0} samples, fewer than one segment of ${segmentSamples} (--segment): give a smaller --segment or a longer capture`);
  }
  const notes = [...input.notes, ...(input.metresPerFringe === null ? ['no --wavelength-nm and --fold: the fringe frequency (periodic-error lines) is not located'] : [])];
  for (const note of notes) say(`note: ${note}`);
  if (out !== undefined) await writeAtomically(out, spectrumCsv(result));
  if (allanOut !== undefined) await writeAtomically(allanOut, allanCsv(result));
  if (report !== undefined) await writeAtomically(report, reportHtml(path, input, result, notes, detrend as Detrend));
  const totalRms = result.cumulativeRmsM[result.cumulativeRmsM.length - 1]!;
  say(
    [
      `${result.samples} samples at ${input.rateHz} Hz: ${result.spectrum.segments} segments, bin width ${result.spectrum.binWidthHz.toPrecision(4)} Hz`,
      `RMS ${nm(totalRms).toPrecision(4)} nm; Allan deviation ${nm(result.allan.deviation[0]!).toPrecision(4)} nm at τ = ${result.allan.tauS[0]!.toPrecision(3)} s`,
      ...Array.from(result.linesHz, (f, k) => `periodic-error line ${k + 1}× at ${f.toPrecision(6)} Hz: ${nm(lineRms(result.spectrum, f)).toPrecision(4)} nm RMS`),
    ].join('\n'),
  );
  return 0;
}

export const spectrum: Command = { name: 'spectrum', summary: 'vibration and stability: spectral density, cumulative RMS, Allan deviation', help, run };
