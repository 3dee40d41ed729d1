// `fringetally positioning`: accuracy and repeatability of an axis from a bidirectional target run (ISO 230-2:2014
// quantities, computed in src/core/positioning.ts): a compensation table as CSV and a report.
import { rename, writeFile } from 'node:fs/promises';
import {
  assignTargetRun,
  createStopDetector,
  positioningStatistics,
  PositioningRunError,
  type AxisStatistics,
  type Stop,
  type StopDetector,
  type TargetRun,
} from '../../src/core/index.js';
import { LASER_CAUTION, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { escapeHtml, factTable, lineChart, page, type ChartSeries } from '../chart.js';
import { readPositions, positionInputHelp, positionInputSpecs, type PositionInput } from '../position-input.js';
import { createProgress } from '../progress.js';

const help = `Usage: fringetally positioning <capture> --targets LIST --cycles N [--out table.csv] [--report report.html] [options]

Positioning accuracy and repeatability of one axis from a bidirectional target run: in each cycle the axis stops at
every target moving in the positive direction, then at every target moving in the negative direction (with an
overrun beyond the end targets so that each is approached from the right side). The stops are found in the
measured position, assigned to the targets in that order, and the ISO 230-2:2014 quantities computed: mean
positional deviation per target and direction, reversal value, repeatability, and for the axis the systematic
positional deviation, mean reversal value, repeatability and accuracy.

Run:
  --targets LIST         target positions, mm: a comma-separated list (0,25,50,75) or START:STEP:END (0:25:300)
  --cycles N             measurement cycles (ISO 230-2 asks for 5)
  --offset-mm D          added to the measured position to give machine coordinates, mm (default: the first stop
                         of the run reads the first target, i.e. the interferometer is zeroed there)
  --invert               the interferometer counts against the axis direction
Stops (dwell detection):
  --band-um W            a stop's samples all lie within a band W wide, µm (default 1)
  --dwell-s S            a stop lasts at least S seconds (default 0.5)
  --match-mm T           a stop belongs to a target within T, mm (default a quarter of the smallest target
                         spacing, at most 0.5); stops near no target (overruns) are left out and listed
Output (at least one):
  --out FILE             compensation table CSV: target_mm, mean_deviation_up_um, mean_deviation_down_um,
                         mean_deviation_um (deviation = measured − target)
  --stops-out FILE       every stop found: start_s, end_s, position_mm, approach, target, direction, cycle
  --report FILE          self-contained HTML report: deviations against target with ±2s bands, the tables
  --quiet                no progress bar and no summary

${positionInputHelp}

${LASER_CAUTION}`;

async function writeAtomically(path: string, text: string): Promise<void> {
  const temporary = `${path}.partial-${process.pid}`;
  await writeFile(temporary, text);
  await rename(temporary, path);
}

/** Targets in mm from `0,25,50` or `0:25:300`. */
function targetsOf(text: string): number[] {
  const range = /^\s*([^:]+):([^:]+):([^:]+)\s*$/.exec(text);
  let values: number[];
  if (range !== null) {
    const [start, step, end] = range.slice(1).map(Number) as [number, number, number];
    if (![start, step, end].every(Number.isFinite) || step <= 0 || end <= start) throw new UsageError(`--targets START:STEP:END needs a positive step and END > START (got "${text}")`);
    const count = Math.round((end - start) / step);
    if (Math.abs(start + count * step - end) > 1e-9 * Math.max(1, Math.abs(end))) throw new UsageError(`--targets: END is not START plus a whole number of steps (got "${text}")`);
    values = Array.from({ length: count + 1 }, (_, k) => start + k * step);
  } else {
    values = text.split(',').map((part) => Number(part.trim()));
    if (values.some((v, k) => !Number.isFinite(v) || text.split(',')[k]!.trim() === '')) throw new UsageError(`--targets must be numbers in mm separated by commas, or START:STEP:END (got "${text}")`);
  }
  if (values.length < 2) throw new UsageError(`--targets needs at least 2 targets (got "${text}")`);
  if (values.some((v, k) => k > 0 && !(v > values[k - 1]!))) throw new UsageError(`--targets must increase, without repeats (got "${text}")`);
  return values;
}

const um = (metres: number) => (metres * 1e6).toFixed(3);
const mm = (metres: number) => Number((metres * 1e3).toPrecision(10)).toString();

function tableCsv(stats: AxisStatistics): string {
  return [
    '# compensation table: deviation = measured position − target (subtract it to compensate)',
    'target_mm,mean_deviation_up_um,mean_deviation_down_um,mean_deviation_um',
    ...stats.targets.map((t) => `${mm(t.targetM)},${um(t.meanUpM)},${um(t.meanDownM)},${um(t.meanM)}`),
  ].join('\n') + '\n';
}

function stopsCsv(stops: readonly Stop[], run: TargetRun, rateHz: number): string {
  const byStop = new Map(run.assigned.map((a) => [a.stop, a]));
  return [
    'start_s,end_s,position_mm,approach,target,direction,cycle',
    ...stops.map((stop) => {
      const a = byStop.get(stop);
      return `${(stop.firstIndex / rateHz).toFixed(6)},${(stop.lastIndex / rateHz).toFixed(6)},${mm(stop.meanM + run.datumOffsetM)},${stop.approach > 0 ? 'up' : stop.approach < 0 ? 'down' : 'none'},${a === undefined ? '' : a.target + 1},${a === undefined ? '' : a.direction > 0 ? 'up' : 'down'},${a === undefined ? '' : a.cycle + 1}`;
    }),
  ].join('\n') + '\n';
}

function reportHtml(path: string, input: PositionInput, run: TargetRun, stats: AxisStatistics, criteria: string, notes: readonly string[]): string {
  const targetsMm = stats.targets.map((t) => t.targetM * 1e3);
  const series: ChartSeries[] = [];
  const band = (mean: (i: number) => number, s: (i: number) => number): ChartSeries => ({
    x: [...targetsMm, ...[...targetsMm].reverse()],
    y: [...stats.targets.map((_, i) => (mean(i) + 2 * s(i)) * 1e6), ...stats.targets.map((_, i) => (mean(i) - 2 * s(i)) * 1e6).reverse()],
    kind: 'band',
  });
  series.push({ ...band((i) => stats.targets[i]!.meanUpM, (i) => stats.targets[i]!.sUpM), label: 'x̄↑ ± 2s↑' });
  series.push({ ...band((i) => stats.targets[i]!.meanDownM, (i) => stats.targets[i]!.sDownM), label: 'x̄↓ ± 2s↓' });
  series.push({ x: targetsMm, y: stats.targets.map((t) => t.meanUpM * 1e6), kind: 'line', label: 'x̄↑' });
  series.push({ x: targetsMm, y: stats.targets.map((t) => t.meanDownM * 1e6), kind: 'line-2', label: 'x̄↓' });
  series.push({ x: targetsMm, y: stats.targets.map((t) => t.meanM * 1e6), kind: 'line-3', label: 'x̄' });
  const dotsX: number[] = [];
  const dotsY: number[] = [];
  run.up.forEach((cycles, i) => cycles.forEach((x) => (dotsX.push(targetsMm[i]!), dotsY.push(x * 1e6))));
  run.down.forEach((cycles, i) => cycles.forEach((x) => (dotsX.push(targetsMm[i]!), dotsY.push(x * 1e6))));
  series.push({ x: dotsX, y: dotsY, kind: 'dots', label: 'single approaches' });
  const axisRows: Array<[string, string, string, string]> = [
    ['systematic positional deviation', um(stats.systematicUpM), um(stats.systematicDownM), um(stats.systematicM)],
    ['range of the mean bidirectional deviation', '', '', um(stats.meanDeviationRangeM)],
    ['reversal value (largest |B|)', '', '', um(stats.reversalM)],
    ['mean reversal value', '', '', um(stats.meanReversalM)],
    ['repeatability (largest R)', um(stats.repeatabilityUpM), um(stats.repeatabilityDownM), um(stats.repeatabilityM)],
    ['accuracy', um(stats.accuracyUpM), um(stats.accuracyDownM), um(stats.accuracyM)],
  ];
  const axisTable = `<table class="grid"><tr><th>axis quantity (µm)</th><th>↑</th><th>↓</th><th>both directions</th></tr>${axisRows
    .map((row) => `<tr>${row.map((cell) => `<td>${escapeHtml(cell)}</td>`).join('')}</tr>`)
    .join('')}</table>`;
  const targetRows = stats.targets
    .map(
      (t, i) =>
        `<tr><td>${i + 1}</td><td>${mm(t.targetM)}</td><td>${um(t.meanUpM)}</td><td>${um(t.meanDownM)}</td><td>${um(t.meanM)}</td><td>${um(t.reversalM)}</td><td>${um(t.sUpM)}</td><td>${um(t.sDownM)}</td><td>${um(t.repeatabilityUpM)}</td><td>${um(t.repeatabilityDownM)}</td><td>${um(t.repeatabilityM)}</td></tr>`,
    )
    .join('');
  const targetTable = `<table class="grid"><tr><th>#</th><th>target (mm)</th><th>x̄↑</th><th>x̄↓</th><th>x̄</th><th>B</th><th>s↑</th><th>s↓</th><th>R↑</th><th>R↓</th><th>R</th></tr>${targetRows}</table>`;
  const cycles = run.up[0]!.length;
  const body = `${factTable([
    ['record', `${path} (${input.source === 'pipeline' ? 'raw capture through the pipeline' : 'positions as given'}, ${input.rateHz} Hz)`],
    ['run', `${stats.targets.length} targets, ${cycles} cycles in each direction: ${run.assigned.length} stops used, ${run.ignored.length} left out`],
    ['stops', criteria],
    ['datum', `measured position + ${(run.datumOffsetM * 1e3).toFixed(6)} mm = machine position`],
  ])}
${notes.length > 0 ? `<p>${notes.map(escapeHtml).join('<br>')}</p>` : ''}
<h2>Deviation against target</h2>
<p><span class="key-1">■ positive direction (↑)</span> &nbsp; <span class="key-2">■ negative direction (↓)</span> &nbsp; <span class="key-3">■ mean of both</span> &nbsp; bands: mean ± 2s per direction; dots: single approaches.</p>
${lineChart(series, { title: 'positional deviation against target', xLabel: 'target (mm)', yLabel: 'deviation = measured − target (µm)' })}
<h2>Axis</h2>
${axisTable}
<h2>Per target (µm)</h2>
${targetTable}
<h2>Definitions</h2>
<p>Deviation x = measured position − target. Per target and direction: the mean x̄ and the standard deviation s
(n − 1 in the denominator) over the cycles; reversal value B = x̄↑ − x̄↓; repeatability R↑ = 4s↑, R↓ = 4s↓, and
bidirectional R = max(2s↑ + 2s↓ + |B|, R↑, R↓). For the axis: systematic positional deviation = range of the means,
per direction and over both; reversal value = largest |B|; mean reversal value = mean of B; repeatability = largest R;
accuracy = range of x̄ ± 2s over all targets. These follow ISO 230-2:2014, clause 3 (terms and definitions; the
clause numbers 3.9–3.23 for these quantities are recalled, not checked against the text) with the test cycle of
clause 4 (recalled).</p>
<p class="caution">${escapeHtml(LASER_CAUTION).replace(/\n/g, '<br>')}</p>`;
  return page(`Positioning accuracy from ${path}`, body);
}

async function run(argv: readonly string[]): Promise<number> {
  const parsed = parseCommandLine(
    argv,
    {
      targets: { type: 'string' },
      cycles: { type: 'string' },
      'offset-mm': { type: 'string' },
      invert: { type: 'boolean' },
      'band-um': { type: 'string' },
      'dwell-s': { type: 'string' },
      'match-mm': { type: 'string' },
      out: { type: 'string' },
      'stops-out': { type: 'string' },
      report: { type: 'string' },
      quiet: { type: 'boolean' },
      ...positionInputSpecs,
    },
    true,
  );
  const values = parsed.values;
  if (parsed.positionals.length !== 1) throw new UsageError('give exactly one capture file');
  const path = parsed.positionals[0]!;
  if (values.targets === undefined) throw new UsageError('--targets is required');
  const targetsMm = targetsOf(values.targets);
  const cycles = numberOption('cycles', values.cycles);
  if (cycles === undefined) throw new UsageError('--cycles is required');
  if (!Number.isInteger(cycles) || cycles < 2) throw new UsageError(`--cycles must be an integer of at least 2, for a standard deviation (got ${values.cycles})`);
  const offsetMm = numberOption('offset-mm', values['offset-mm']);
  const bandUm = numberOption('band-um', values['band-um']) ?? 1;
  const dwellS = numberOption('dwell-s', values['dwell-s']) ?? 0.5;
  const matchMm = numberOption('match-mm', values['match-mm']);
  if (!(bandUm > 0)) throw new UsageError(`--band-um must be positive (got ${values['band-um']})`);
  if (!(dwellS > 0)) throw new UsageError(`--dwell-s must be positive (got ${values['dwell-s']})`);
  if (matchMm !== undefined && !(matchMm > 0)) throw new UsageError(`--match-mm must be positive (got ${values['match-mm']})`);
  if (values.out === undefined && values.report === undefined && values['stops-out'] === undefined) throw new UsageError('give at least one of --out, --stops-out and --report');
  const quiet = values.quiet === true;
  const say = (line: string) => {
    if (!quiet) process.stderr.write(line + '\n');
  };
  const sign = values.invert === true ? -1 : 1;

  const stops: Stop[] = [];
  let detector: StopDetector | null = null;
  let scratch = new Float64Array(0);
  const input = await readPositions(path, values, createProgress(quiet), say, (start) => {
    const created = createStopDetector({ rateHz: start.rateHz, bandHalfWidthM: bandUm * 0.5e-6, minDwellS: dwellS });
    detector = created;
    return (positionM, length) => {
      if (sign === 1) return created.process(positionM, length, stops);
      if (scratch.length < length) scratch = new Float64Array(length);
      for (let i = 0; i < length; i++) scratch[i] = -positionM[i]!;
      created.process(scratch, length, stops);
    };
  });
  (detector as StopDetector | null)?.finish(stops);
  for (const note of input.notes) say(`note: ${note}`);
  const criteria = `at least ${dwellS} s within a band ${bandUm} µm wide; reading = mean over the stop; approach side = the last sample before it`;
  let targetRun: TargetRun;
  try {
    targetRun = assignTargetRun(stops, input.rateHz, {
      targetsM: targetsMm.map((t) => t * 1e-3),
      cycles,
      ...(matchMm === undefined ? {} : { matchToleranceM: matchMm * 1e-3 }),
      ...(offsetMm === undefined ? {} : { datumOffsetM: offsetMm * 1e-3 }),
    });
  } catch (error) {
    if (error instanceof PositioningRunError) throw new Error(`${path}: ${error.message} (${stops.length} stops found: ${criteria})`);
    throw error;
  }
  const stats = positioningStatistics(targetsMm.map((t) => t * 1e-3), targetRun.up, targetRun.down);
  if (values.out !== undefined) await writeAtomically(values.out, tableCsv(stats));
  if (values['stops-out'] !== undefined) await writeAtomically(values['stops-out'], stopsCsv(stops, targetRun, input.rateHz));
  if (values.report !== undefined) await writeAtomically(values.report, reportHtml(path, input, targetRun, stats, criteria, input.notes));
  say(
    [
      `${stops.length} stops found, ${targetRun.assigned.length} used (${targetsMm.length} targets × 2 directions × ${cycles} cycles), ${targetRun.ignored.length} left out`,
      `systematic positional deviation E ${um(stats.systematicM)} µm, mean reversal value ${um(stats.meanReversalM)} µm, repeatability R ${um(stats.repeatabilityM)} µm, accuracy A ${um(stats.accuracyM)} µm`,
    ].join('\n'),
  );
  return 0;
}

export const positioning: Command = { name: 'positioning', summary: 'positioning accuracy and repeatability of an axis from a target run', help, run };
