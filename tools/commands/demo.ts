// `fringetally demo` (npm start): the main job on the bundled demo capture: calibrate, replay, report.
import { mkdir } from 'node:fs/promises';
import { join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { LASER_CAUTION, parseCommandLine, type Command } from '../cli-kit.js';
import { calibrate } from './calibrate.js';
import { replay } from './replay.js';

const DEMO_CAPTURE = fileURLToPath(new URL('../../../demo/stage-reversals.wav', import.meta.url));

const help = `Usage: fringetally demo [--out-dir DIR]

Runs the main job on the bundled demo capture, an invented scenario: a stage moving 20 µm forth and back
(trapezoidal moves with reversals, 0.02 m/s peak) in front of a He-Ne interferometer (632.9908 nm, fold 2)
whose detectors have offsets, unequal gains and a quadrature error, with a 1 ms beam interruption while the
stage dwells. It fits the correction (cal.json), replays the capture (result.csv) and writes report.html.

Options:
  --out-dir DIR   where the outputs go (default: demo-output)`;

async function run(argv: readonly string[]): Promise<number> {
  const { values } = parseCommandLine(argv, { 'out-dir': { type: 'string' } }, false);
  const outDir = resolve(values['out-dir'] ?? 'demo-output');
  await mkdir(outDir, { recursive: true });
  const show = (path: string) => relative(process.cwd(), path) || path;
  const calibration = join(outDir, 'cal.json');
  const result = join(outDir, 'result.csv');
  const report = join(outDir, 'report.html');
  process.stdout.write(`Demo capture: ${show(DEMO_CAPTURE)} (invented scenario: stage reversals, imperfect detectors, a beam interruption)\n\n`);
  process.stdout.write('== calibrate ==\n');
  const calibrated = await calibrate.run([DEMO_CAPTURE, '--out', calibration, '--wavelength-nm', '632.9908', '--fold', '2']);
  if (calibrated !== 0) return calibrated;
  process.stdout.write('\n== replay ==\n');
  const replayed = await replay.run([
    DEMO_CAPTURE,
    '--calibration', calibration,
    '--wavelength-nm', '632.9908',
    '--fold', '2',
    '--out', result,
    '--report', report,
  ]);
  if (replayed !== 0) return replayed;
  process.stdout.write(`\nCalibration: ${show(calibration)}\nResults:     ${show(result)}\nReport:      ${show(report)} (open it in a browser)\n\n${LASER_CAUTION}\n`);
  return 0;
}

export const demo: Command = { name: 'demo', summary: 'run calibrate, replay and the report on the bundled demo capture', help, run };
