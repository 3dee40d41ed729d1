// `fringetally angles`: yaw, pitch and the displacement of a point of interest from the positions of several
// parallel axes recorded together (one result file per axis, sample for sample), written beside the positions.
import { openCapture, openFileSink, openStreamSink, type Capture, type CaptureBlock } from '../../src/io/capture/index.js';
import { LASER_CAUTION, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { ANGLE_COLUMNS, angleCells, geometryOf, geometryOptionHelp, geometryOptionSpecs, measuredText } from '../geometry-options.js';
import { POSITION_COLUMN } from '../position-input.js';

const help = `Usage: fringetally angles <axis1.csv> <axis2.csv> [<axis3.csv> ...] --beam X,Y --beam X,Y [...] --out rows.csv|-
                          [--point X,Y[,Z]] [--model exact|small-angle] [uncertainties]

Two or more parallel axes measured together give the angles of the moving body, and its displacement at a point
of interest (its Abbe offsets times the angles, added to the translation). Each file holds one axis' positions
(${POSITION_COLUMN}, replay's result rows), all recorded from one clock: row k of every file is the same instant.
Two beams apart in x give yaw, apart in y pitch; three or more not on one line give both.
Conventions: the beams run along z; yaw ψ turns the body about +y, pitch θ about +x (right-handed), so for small
angles axis k reads d − ψ·x_k + θ·y_k, with d the displacement at the origin of the beam coordinates.

${geometryOptionHelp}
Output:
  --out FILE|-           rows: t, position_m_1 … position_m_N, yaw_rad, pitch_rad, point_m, u_yaw_rad,
                         u_pitch_rad, u_point_m (an angle the beams do not measure is empty)
  --every N              write every Nth row (default 1)

${LASER_CAUTION}`;

async function run(argv: readonly string[]): Promise<number> {
  const parsed = parseCommandLine(
    argv,
    {
      ...geometryOptionSpecs,
      out: { type: 'string' },
      every: { type: 'string' },
    },
    true,
  );
  const { values, positionals: files } = parsed;
  if (files.length < 2) throw new UsageError('give the position files of at least 2 axes');
  if (values.out === undefined) throw new UsageError('--out is required');
  const { geometry } = geometryOf(values, files.length, 'file');
  const every = numberOption('every', values.every) ?? 1;
  if (!Number.isInteger(every) || every < 1) throw new UsageError(`--every must be a positive integer (got ${values.every})`);

  const captures: Capture[] = [];
  try {
    for (const file of files) captures.push(await openCapture(file, { xChannel: POSITION_COLUMN, yChannel: POSITION_COLUMN }));
    const rate = captures[0]!.info.rateHz;
    captures.forEach((capture, k) => {
      if (Math.abs(capture.info.rateHz / rate - 1) > 1e-6) throw new Error(`${files[k]}: ${capture.info.rateHz} Hz, but ${files[0]} has ${rate} Hz: the axes must be recorded together`);
    });
    const iterators = captures.map((capture) => capture.blocks());
    const sink = values.out === '-' ? openStreamSink(process.stdout) : await openFileSink(values.out);
    const header = ['t', ...files.map((_, k) => `position_m_${k + 1}`), ...ANGLE_COLUMNS].join(',') + '\n';
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
          text += `${t.toFixed(9)},${Array.from(readings, (r) => r.toFixed(12)).join(',')},${angleCells(out)}\n`;
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
    process.stderr.write(`${index} rows of ${files.length} axes: ${measuredText(geometry)} and the point of interest written to ${values.out}\n`);
  } finally {
    for (const capture of captures) await capture.close();
  }
  return 0;
}

export const angles: Command = { name: 'angles', summary: 'yaw, pitch and a point of interest from several parallel axes', help, run };
