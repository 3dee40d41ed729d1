// `fringetally angles`: yaw, pitch and the displacement of a point of interest from the positions of several
// parallel axes recorded together (one result file per axis, sample for sample), written beside the positions.
import { createAxisGeometry, type AngleModel, type BeamPlacement } from '../../src/core/index.js';
import { openCapture, openFileSink, openStreamSink, type Capture, type CaptureBlock } from '../../src/io/index.js';
import { LASER_CAUTION, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { POSITION_COLUMN } from '../position-input.js';

const help = `Usage: fringetally angles <axis1.csv> <axis2.csv> [<axis3.csv> ...] --beam X,Y --beam X,Y [...] --out rows.csv|-
                          [--point X,Y[,Z]] [--model exact|small-angle] [uncertainties]

Two or more parallel axes measured together give the angles of the moving body, and its displacement at a point
of interest (its Abbe offsets times the angles, added to the translation). Each file holds one axis' positions
(${POSITION_COLUMN}, replay's result rows), all recorded from one clock: row k of every file is the same instant.
Two beams apart in x give yaw, apart in y pitch; three or more not on one line give both.
Conventions: the beams run along z; yaw ψ turns the body about +y, pitch θ about +x (right-handed), so for small
angles axis k reads d − ψ·x_k + θ·y_k, with d the displacement at the origin of the beam coordinates.

Geometry (mm, in the plane across the motion, one --beam per file, in file order):
  --beam X,Y             lateral place of the beam of this axis, mm
  --point X,Y[,Z]        point of interest, mm (Z along the motion from the mirror plane; default 0,0,0)
  --model M              exact (rigid body, default) or small-angle
Uncertainties (standard, inputs uncorrelated; default 0):
  --u-reading-nm U       of each axis reading, nm
  --u-beam-mm U          of each beam's lateral place, mm
  --u-point-mm U         of each coordinate of the point of interest, mm
Output:
  --out FILE|-           rows: t, position_m_1 … position_m_N, yaw_rad, pitch_rad, point_m, u_yaw_rad,
                         u_pitch_rad, u_point_m (an angle the beams do not measure is empty)
  --every N              write every Nth row (default 1)

${LASER_CAUTION}`;

function coordinates(flag: string, text: string, min: number, max: number): number[] {
  const values = text.split(',').map((part) => (part.trim() === '' ? Number.NaN : Number(part)));
  if (values.length < min || values.length > max || values.some((v) => !Number.isFinite(v))) {
    throw new UsageError(`--${flag} expects ${min === max ? min : `${min} or ${max}`} numbers in mm separated by commas (got "${text}")`);
  }
  return values;
}

const cell = (value: number, digits: number) => (Number.isFinite(value) ? value.toFixed(digits) : '');

async function run(argv: readonly string[]): Promise<number> {
  const parsed = parseCommandLine(
    argv,
    {
      beam: { type: 'string', multiple: true },
      point: { type: 'string' },
      model: { type: 'string' },
      'u-reading-nm': { type: 'string' },
      'u-beam-mm': { type: 'string' },
      'u-point-mm': { type: 'string' },
      out: { type: 'string' },
      every: { type: 'string' },
    },
    true,
  );
  const { values, positionals: files } = parsed;
  if (files.length < 2) throw new UsageError('give the position files of at least 2 axes');
  const beamTexts = values.beam ?? [];
  if (beamTexts.length !== files.length) throw new UsageError(`give one --beam X,Y per file (${files.length} files, ${beamTexts.length} --beam)`);
  if (values.out === undefined) throw new UsageError('--out is required');
  const model = values.model ?? 'exact';
  if (model !== 'exact' && model !== 'small-angle') throw new UsageError(`--model must be exact or small-angle (got "${model}")`);
  const every = numberOption('every', values.every) ?? 1;
  if (!Number.isInteger(every) || every < 1) throw new UsageError(`--every must be a positive integer (got ${values.every})`);
  const uncertainty = (flag: string, scale: number) => {
    const value = numberOption(flag, values[flag as 'u-reading-nm']) ?? 0;
    if (value < 0) throw new UsageError(`--${flag} must not be negative (got ${value})`);
    return value * scale;
  };
  const uReading = uncertainty('u-reading-nm', 1e-9);
  const uBeam = uncertainty('u-beam-mm', 1e-3);
  const uPoint = uncertainty('u-point-mm', 1e-3);
  const beams: BeamPlacement[] = beamTexts.map((text) => {
    const [x, y] = coordinates('beam', text, 2, 2) as [number, number];
    return { xM: x * 1e-3, yM: y * 1e-3, readingUncertaintyM: uReading, placementUncertaintyM: uBeam };
  });
  const [px, py, pz] = values.point === undefined ? [0, 0, 0] : coordinates('point', values.point, 2, 3);
  let geometry;
  try {
    geometry = createAxisGeometry({ beams, pointOfInterest: { xM: px! * 1e-3, yM: py! * 1e-3, zM: (pz ?? 0) * 1e-3, uncertaintyM: uPoint }, model: model as AngleModel });
  } catch (error) {
    throw new UsageError(`--beam: ${(error as Error).message}`);
  }

  const captures: Capture[] = [];
  try {
    for (const file of files) captures.push(await openCapture(file, { xChannel: POSITION_COLUMN, yChannel: POSITION_COLUMN }));
    const rate = captures[0]!.info.rateHz;
    captures.forEach((capture, k) => {
      if (Math.abs(capture.info.rateHz / rate - 1) > 1e-6) throw new Error(`${files[k]}: ${capture.info.rateHz} Hz, but ${files[0]} has ${rate} Hz: the axes must be recorded together`);
    });
    const iterators = captures.map((capture) => capture.blocks());
    const sink = values.out === '-' ? openStreamSink(process.stdout) : await openFileSink(values.out);
    const header = ['t', ...files.map((_, k) => `position_m_${k + 1}`), 'yaw_rad', 'pitch_rad', 'point_m', 'u_yaw_rad', 'u_pitch_rad', 'u_point_m'].join(',') + '\n';
    await sink.write(Buffer.from(header), header.length);
    const readings = new Float64Array(files.length);
    const out = new Float64Array(6);
    let index = 0;
    let completed = false;
    try {
      for (;;) {
        const steps = await Promise.all(iterators.map((iterator) => iterator.next()));
        const done = steps.filter((step) => step.done === true).length;
        if (done === steps.length) break;
        const blocks = steps.map((step) => step.value as CaptureBlock | undefined);
        const lengths = blocks.map((block) => (block === undefined ? 0 : block.length));
        if (done > 0 || lengths.some((length) => length !== lengths[0])) {
          const shortest = lengths.indexOf(Math.min(...lengths));
          throw new Error(`${files[shortest]} ends after ${index + lengths[shortest]!} rows, before the other files: the axes must be recorded together`);
        }
        let text = '';
        for (let i = 0; i < lengths[0]!; i++, index++) {
          if (index % every !== 0) continue;
          for (let k = 0; k < blocks.length; k++) readings[k] = blocks[k]!.x[i]!;
          geometry.solve(readings, out);
          const t = blocks[0]!.t === null ? index / rate : blocks[0]!.t![i]!;
          text += `${t.toFixed(9)},${Array.from(readings, (r) => r.toFixed(12)).join(',')},${cell(out[0]!, 12)},${cell(out[1]!, 12)},${cell(out[2]!, 12)},${cell(out[3]!, 15)},${cell(out[4]!, 15)},${cell(out[5]!, 15)}\n`;
        }
        if (text !== '') {
          const bytes = Buffer.from(text);
          await sink.write(bytes, bytes.length);
        }
      }
      completed = true;
    } finally {
      if (completed) await sink.commit();
      else await sink.discard();
    }
    process.stderr.write(`${index} rows of ${files.length} axes: ${geometry.measures.yaw ? 'yaw' : ''}${geometry.measures.yaw && geometry.measures.pitch ? ' and ' : ''}${geometry.measures.pitch ? 'pitch' : ''} and the point of interest written to ${values.out}\n`);
  } finally {
    for (const capture of captures) await capture.close();
  }
  return 0;
}

export const angles: Command = { name: 'angles', summary: 'yaw, pitch and a point of interest from several parallel axes', help, run };
