// `fringetally listen`: live tracking over a serial link: wire frames (or text lines) in, result rows out, with an
// optional raw record, a status line on a terminal, and a JSON summary of the link and decoder counters.
import { createWriteStream, fstatSync } from 'node:fs';
import { Socket } from 'node:net';
import { extname } from 'node:path';
import { alarmKinds, alarmNames, MODEL_WATCH_ALARM, OptionError, type ChannelParameters, type EllipseCalibration } from '../../src/core/index.js';
import { createCaptureWriter, writeFileAtomically, type CaptureWriter } from '../../src/io/capture/index.js';
import { createEdgeWriter, createResultWriter, type EdgeWriter, type ResultFormat, type ResultFileWriter } from '../../src/io/results/index.js';
import { createSerialByteSource, SERIAL_SOURCE_DEFAULTS } from '../../src/io/serial/index.js';
import { createLiveEdgeLatch, latchEdges, LIVE_FIT_DEFAULTS, type LinkBlock } from '../../src/io/live/index.js';
import type { AxisBlockSummary } from '../../src/stream/index.js';
import { WIRE_MAX_SAMPLES_PER_FRAME } from '../../src/io/wire/index.js';
import { readCalibrationFitResidual, readCalibrationHarmonics, readCalibrationLayout } from '../calibration-file.js';
import { checkFiles, formatNumber, LASER_CAUTION, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { createLiveSession, type LiveSession, type LiveSink, type LiveSummary } from '../live/live-session.js';
import { createStatusLine, formatStatus } from '../live/status-line.js';
import { resultRows } from '../live/result-rows.js';
import { lengthScaleOf, measureOptionHelp, measureOptionSpecs } from '../measure-options.js';
import {
  createAngleRowWriter,
  geometryOf,
  geometryOptionHelp,
  geometryOptionSpecs,
  hasGeometry,
  measuredText,
  type AngleRowBlock,
  type AngleRowWriter,
} from '../geometry-options.js';
import { budgetOf, environmentOf, environmentOptionHelp, environmentOptionSpecs, withConfig } from '../environment-options.js';
import { feedOptionHelp, feedOptionSpecs, feedSettingsOf, openLiveFeed, type LiveFeed } from '../live/live-feed.js';
import { openEnvironmentLog, openEnvironmentTopic } from '../live/live-environment.js';
import { commandHandler, CONTROL_KEYS, PRESET_SIGNAL, startLiveControls, ZERO_SIGNAL, type LiveControls } from '../live/live-controls.js';

/** Input kept while an output is slow, MiB: about 11 s at 921600 Bd, 0.4 s of 2 channels at 10 MHz. */
const DEFAULT_INPUT_BUFFER_MIB = 1;
/** Failed opens of a port that never opened before listen gives up: with the default delays about 31 s. */
const DEFAULT_OPEN_RETRIES = 10;
/** Gap lines printed; later gaps are only counted (the summary keeps them all, up to its own limit). */
const MAX_GAP_LINES = 20;

const help = `Usage: fringetally listen --port PATH --baud N --wavelength-nm L --fold F --out FILE|- [--format csv|jsonl]
                          [--duration S] [--every N] [--record FILE] [--calibration cal.json] [options]

Live tracking over a serial link (or pseudo-terminal): decodes fringetally wire frames (docs/wire-format.md),
runs the pipeline and writes rows with the same columns as replay: t (s, counted from the sample stream: the first
sample received is t = 0, lost samples included), position_m (m, relative to the first sample), velocity_m_s
(m/s), level (corrected radius over calibrated radius), alarms (active alarms, space-separated). Stops after
--duration S seconds of samples received or on SIGINT/SIGTERM; files are complete only after a clean stop.

Without --calibration the correction is fitted live to the first --fit-samples samples; those rows are held back
until the fit is made (none are lost), then written. The stage must move over at least about one fringe then.
With 3 or 4 detector outputs per axis (wire format version 3) the live fit is calibrate --channels' fit: the
source power first, then the ellipse of the power-normalised pair; the rows then carry a power column after the
level (the source power, 1 = its mean over the fitted samples or the calibration capture), as replay writes it.
Lost samples (sequence gaps, CRC failures, link outages) enter the pipeline as an input gap: input_gap on the next
row, and count_lost on every row after it. After a link outage at least 1 sample is counted lost; the frame
counter gives the true number when the device kept counting (see docs/live.md).

Options:
  --port PATH              serial device or pseudo-terminal (required); reopened with backoff when it vanishes
  --baud N                 baud rate, Bd (default ${SERIAL_SOURCE_DEFAULTS.baudRate})
  --out FILE|-             result file, .csv or .jsonl (or --format with -, standard output) (required)
  --format csv|jsonl       result format when the file name does not tell
  --every N                write every Nth sample (default 1)
  --duration S             stop after S seconds of samples received, round(S × rate) samples: lost samples and
                           repeated frames do not count (default: until SIGINT/SIGTERM)
  --record FILE            also write every received sample of the axis to a capture (.csv int16 text or .wav int16):
                           x, y for a pair; every output for 3 or 4 (columns named as in the calibration, else
                           ch1..chN), which replay --channels reads back
  --summary FILE           write a JSON summary: counters, gaps, link events, alarms, calibration
  --latch-out FILE         write the position of every axis at every edge the frames carry (trigger, reference
                           mark; wire format version 2), one CSV row per axis and edge: t (s), sample_time
                           (fractional sample index), axis, line, edge (rising|falling), position_m,
                           uncertainty_m (bound of the interpolation error, m), velocity_m_s, alarms
                           (docs/trigger-edges.md)
  --calibration FILE       calibration from fringetally calibrate (default: live fit); a calibration of 3 or 4
                           detector outputs (calibrate --channels) tracks an axis whose frames carry as many
                           (wire format version 3): they are combined into the power-normalised pair
  --fit-samples N          samples for the live fit, 64..16777216 (default ${LIVE_FIT_DEFAULTS.fitSamples}); retried up to ${LIVE_FIT_DEFAULTS.fitAttempts} times
  --rate-hz R              sample rate, Hz, when the frames carry no rate field (required with --text)
  --axis K                 axis to track in multi-axis frames: channels 2K (x) and 2K+1 (y) (default 0)
  --max-samples-per-frame N  largest frame accepted, 1..${WIRE_MAX_SAMPLES_PER_FRAME} (default ${WIRE_MAX_SAMPLES_PER_FRAME}, the format's maximum);
                           larger frames are refused and counted, and the summary names the value that admits them
  --text                   read "x,y" text lines instead of binary frames (no gap detection: bring-up only)
  --channels N             with --text: integers per line, even (default 2·(axis+1))
  --retry-ms MS            first reopen delay after the port vanished, ms (default ${SERIAL_SOURCE_DEFAULTS.retryDelayMs}, doubling to ${SERIAL_SOURCE_DEFAULTS.maxRetryDelayMs})
  --open-retries N         failed opens of a port that has not opened yet before giving up (default ${DEFAULT_OPEN_RETRIES},
                           about 31 s); once it has opened, a vanished port is retried until stopped
  --input-buffer-mib M     input kept while an output does not keep up, MiB (default ${DEFAULT_INPUT_BUFFER_MIB}); beyond it
                           listen stops with exit 1, naming the stalled output (files closed, summary written)
  --environment-log FILE   air that changes during the run, followed as a sensor appends to it: CSV with a
                           header naming t (s from the first sample), temperature (°C), pressure (Pa),
                           humidity (% relative) and optionally co2 (µmol/mol), as replay reads it; at least one
                           reading at the start; interpolated, the latest held beyond it. Replaces the fixed air
                           conditions; the index rescales the reading, never the count
  --environment-topic TOPIC  air that changes during the run, read from an MQTT topic on the broker of --mqtt:
                           each message a JSON object {"temperatureC":…,"pressurePa":…,"relativeHumidityPct":…}
                           (optionally "co2Ppm"; others ignored), taking effect from the next block of samples
                           and held; --temperature-c, --pressure-pa and --humidity-pct give the air until the first
                           reading. A broker that is down leaves the latest reading in force (the summary says so)
  --preset-mm P            the position, mm, that the preset key p and ${PRESET_SIGNAL} set (default: no preset)
  --quiet                  no log lines, status line or summary on stderr
${measureOptionHelp}
${environmentOptionHelp}

Angles of several parallel axes: with one --beam per axis (2..8), listen tracks frame axes 0..N−1 (each with the
--calibration given, or its own live fit) and its rows (CSV) carry t, position_m_1 … position_m_N, the angle
columns of fringetally angles (yaw_rad, pitch_rad, point_m and their standard uncertainties; an angle the beams
do not measure is empty) and alarms (of all axes); the feed and MQTT carry the geometry too (docs/analysis.md).
${geometryOptionHelp}
${feedOptionHelp}

On a terminal, stderr shows a status line (position, velocity, level, alarms, frames, CRC failures, gaps, link),
redrawn at most 5 times per second.

Re-reference while listening (the position reads 0, or --preset-mm, from the next sample on, and count_lost
clears there; the log and --summary record each one): when stdin is a terminal, key ${CONTROL_KEYS.zero} zeroes, ${CONTROL_KEYS.preset} presets,
${CONTROL_KEYS.stop} or Ctrl-C stops; for scripts, ${ZERO_SIGNAL} zeroes and ${PRESET_SIGNAL} presets (kill -USR1 PID). With --token, the
WebSocket feed and the MQTT topic PREFIX/command take the same as an authenticated command (docs/feed.md).

${LASER_CAUTION}`;

const optionSpecs = {
  port: { type: 'string' },
  baud: { type: 'string' },
  out: { type: 'string' },
  format: { type: 'string' },
  every: { type: 'string' },
  duration: { type: 'string' },
  record: { type: 'string' },
  summary: { type: 'string' },
  'latch-out': { type: 'string' },
  calibration: { type: 'string' },
  'fit-samples': { type: 'string' },
  'rate-hz': { type: 'string' },
  axis: { type: 'string' },
  'max-samples-per-frame': { type: 'string' },
  text: { type: 'boolean' },
  channels: { type: 'string' },
  'retry-ms': { type: 'string' },
  'open-retries': { type: 'string' },
  'input-buffer-mib': { type: 'string' },
  'preset-mm': { type: 'string' },
  'environment-log': { type: 'string' },
  'environment-topic': { type: 'string' },
  quiet: { type: 'boolean' },
  ...measureOptionSpecs,
  ...environmentOptionSpecs,
  ...feedOptionSpecs,
  ...geometryOptionSpecs,
} as const;

function integerOption(name: string, text: string | undefined, fallback: number, min: number, max: number): number {
  const value = numberOption(name, text) ?? fallback;
  if (!Number.isInteger(value) || value < min || value > max) throw new UsageError(`--${name} must be an integer in ${min}..${max} (got ${text})`);
  return value;
}

function describeCalibration(calibration: EllipseCalibration): string {
  const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = calibration;
  return `offsets ${offsetX.toFixed(1)}, ${offsetY.toFixed(1)}; amplitudes ${amplitudeX.toFixed(1)}, ${amplitudeY.toFixed(1)}; phase error ${phaseErrorRad.toFixed(4)} rad`;
}

function describeChannels(channels: readonly ChannelParameters[]): string {
  const list = (values: number[], digits: number) => values.map((value) => value.toFixed(digits)).join(', ');
  return `${channels.length} outputs: offsets ${list(channels.map((c) => c.offset), 1)}; amplitudes ${list(channels.map((c) => c.amplitude), 1)}; phases ${list(channels.map((c) => c.phaseRad), 4)} rad`;
}

async function run(argv: readonly string[]): Promise<number> {
  const parsed = parseCommandLine(argv, optionSpecs, false);
  // The repeatable feed options stay out of the config merge, which takes single values.
  const { 'allow-origin': allowOrigins, proxy: proxies, beam: beams, ...single } = parsed.values;
  const { 'allow-origin': _allowOriginSpec, proxy: _proxySpec, beam: _beamSpec, ...singleSpecs } = optionSpecs;
  const values = withConfig(single, singleSpecs) as typeof single;
  const port = values.port;
  if (port === undefined) throw new UsageError('--port is required');
  const out = values.out;
  if (out === undefined) throw new UsageError('--out is required');
  const extension = extname(out).toLowerCase();
  const formatText = values.format ?? (extension === '.jsonl' ? 'jsonl' : extension === '.csv' ? 'csv' : undefined);
  if (formatText !== 'csv' && formatText !== 'jsonl') throw new UsageError(`cannot tell the result format of "${out}": use .csv, .jsonl or --format csv|jsonl`);
  const baudRate = integerOption('baud', values.baud, SERIAL_SOURCE_DEFAULTS.baudRate, 1, 20_000_000);
  const every = integerOption('every', values.every, 1, 1, 1_000_000_000);
  const durationS = numberOption('duration', values.duration);
  if (durationS !== undefined && !(durationS > 0)) throw new UsageError(`--duration must be positive (got ${values.duration})`);
  const rateHz = numberOption('rate-hz', values['rate-hz']);
  if (rateHz !== undefined && !(rateHz > 0)) throw new UsageError(`--rate-hz must be positive (got ${values['rate-hz']})`);
  const axis = integerOption('axis', values.axis, 0, 0, 7);
  // Several axes with their geometry: frame axes 0..N−1, one per --beam.
  if (hasGeometry({ ...values, beam: beams }) && (beams?.length ?? 0) === 0) {
    throw new UsageError('--point, --model and --u-* describe the geometry of --beam axes: give one --beam per axis');
  }
  const angles = beams === undefined || beams.length === 0 ? null : geometryOf({ ...values, beam: beams }, beams.length, 'axis');
  if (angles !== null) {
    if (values.axis !== undefined) throw new UsageError('--axis picks one axis; with --beam listen tracks axes 0..N−1, one per --beam');
    if (formatText !== 'csv') throw new UsageError('rows with angles (--beam) are CSV: use .csv or --format csv');
    if (values.record !== undefined) throw new UsageError('--record writes one axis; leave it out with --beam');
  }
  const textMode = values.text === true;
  if (textMode && rateHz === undefined) throw new UsageError('--text needs --rate-hz: text lines carry no sample rate');
  if (!textMode && values.channels !== undefined) throw new UsageError('--channels applies to --text only: frames state their channel count');
  const channels = integerOption('channels', values.channels, 2 * (axis + 1), 2, 16);
  if (channels % 2 !== 0 || channels < 2 * axis + 2) throw new UsageError(`--channels must be even and at least ${2 * axis + 2} for axis ${axis} (got ${channels})`);
  const maxSamplesPerFrame = integerOption('max-samples-per-frame', values['max-samples-per-frame'], WIRE_MAX_SAMPLES_PER_FRAME, 1, WIRE_MAX_SAMPLES_PER_FRAME);
  const fitSamples = integerOption('fit-samples', values['fit-samples'], LIVE_FIT_DEFAULTS.fitSamples, 64, 2 ** 24);
  const retryDelayMs = integerOption('retry-ms', values['retry-ms'], SERIAL_SOURCE_DEFAULTS.retryDelayMs, 1, 600_000);
  const openRetries = integerOption('open-retries', values['open-retries'], DEFAULT_OPEN_RETRIES, 0, 1_000_000);
  maxRetriesShown = openRetries;
  const record = values.record;
  const recordExtension = record === undefined ? '' : extname(record).toLowerCase();
  if (record !== undefined && recordExtension !== '.csv' && recordExtension !== '.wav') throw new UsageError(`--record must end in .csv or .wav (got "${record}")`);
  if (recordExtension === '.wav' && rateHz !== undefined && !Number.isInteger(rateHz)) {
    throw new UsageError(`a .wav record needs a whole-hertz rate (got --rate-hz ${rateHz}): record to .csv instead`);
  }
  const latchOut = values['latch-out'];
  const quiet = values.quiet === true;
  const presetMm = numberOption('preset-mm', values['preset-mm']);
  if (presetMm !== undefined && !(Math.abs(presetMm) <= 1e6)) throw new UsageError(`--preset-mm must be a position in mm within ±1000000 (got ${values['preset-mm']})`);
  const lengthScale = lengthScaleOf(values, {});
  const environment = environmentOf(values, lengthScale.wavelengthM, lengthScale.refractiveIndex);
  const scale = {
    wavelengthM: lengthScale.wavelengthM,
    fold: lengthScale.fold,
    refractiveIndex: environment.refractiveIndex,
    lengthScale: environment.thermalFactor,
    ...(lengthScale.bandwidthHz === undefined ? {} : { bandwidthHz: lengthScale.bandwidthHz }),
    ...(lengthScale.unwrap === undefined ? {} : { unwrap: lengthScale.unwrap }),
  };
  const notes = [...lengthScale.notes, ...environment.notes];
  const feedSettings = feedSettingsOf({ ...values, 'allow-origin': allowOrigins, proxy: proxies });
  await checkFiles(
    [
      ...(values.calibration === undefined ? [] : [{ option: '--calibration', path: values.calibration }]),
      ...(values.config === undefined ? [] : [{ option: '--config', path: values.config }]),
      ...(values['environment-log'] === undefined ? [] : [{ option: '--environment-log', path: values['environment-log'] }]),
    ],
    [
      { option: '--out', path: out },
      ...(record === undefined ? [] : [{ option: '--record', path: record }]),
      ...(values.summary === undefined ? [] : [{ option: '--summary', path: values.summary }]),
      ...(latchOut === undefined ? [] : [{ option: '--latch-out', path: latchOut }]),
    ],
  );
  const layout = values.calibration === undefined ? null : await readCalibrationLayout(values.calibration);
  const calibration = layout?.ellipse ?? null;
  // What replay applies beyond the ellipse: the file's harmonic correction, and the calibration_stale watch (bound
  // from the file's fit residual, or the live fit's).
  const harmonics = values.calibration === undefined ? undefined : await readCalibrationHarmonics(values.calibration);
  const fitResidualRms = values.calibration === undefined ? undefined : await readCalibrationFitResidual(values.calibration);
  // Three or four outputs: their parameters calibrate the axis (a live fit finds them when the frames carry as many).
  const axisCalibration =
    layout === null
      ? { calibration: 'fit' as const }
      : {
          ...(layout.ellipse === null ? { channels: layout.channels, calibration: null } : { calibration: layout.ellipse }),
          ...(harmonics === undefined ? {} : { harmonics }),
        };
  const environmentLog = values['environment-topic'] === undefined ? await openEnvironmentLog(values, lengthScale, environment, notes) : null;
  const environmentTopic = await openEnvironmentTopic(values, lengthScale, environment, feedSettings?.mqtt ?? null, notes);
  const changingAir = environmentLog ?? environmentTopic;
  const maxBufferedBytes = integerOption('input-buffer-mib', values['input-buffer-mib'], DEFAULT_INPUT_BUFFER_MIB, 1, 4096) * 2 ** 20;
  const source = createSerialByteSource({ path: port, baudRate, retryDelayMs, maxRetriesBeforeFirstOpen: openRetries });
  // Every option, including the chain's, is checked here: nothing is opened before.
  let chain: ReturnType<typeof createLiveSession>;
  const sinks: LiveSink[] = [];
  let oversizeShown = 0;
  try {
    chain = createLiveSession({
      source,
      track: {
        axes:
          angles === null
            ? [{ name: 'X', channelPair: axis, ...scale, ...axisCalibration, modelWatch: fitResidualRms === undefined ? {} : { fitResidualRms } }]
            : Array.from({ length: angles.geometry.beams }, (_, k) => ({
                name: `X${k + 1}`,
                channelPair: k,
                ...scale,
                ...axisCalibration,
                modelWatch: fitResidualRms === undefined ? {} : { fitResidualRms },
              })),
        link: textMode ? { mode: 'text', channelCount: channels, rateHz } : { maxSamplesPerFrame, ...(rateHz === undefined ? {} : { rateHz }) },
        fitSamples,
        ...(durationS === undefined ? {} : { durationS }),
        ...(changingAir === null ? {} : { refractiveIndexAt: changingAir.indexAt }),
      },
      sinks,
      maxBufferedBytes,
      onOversizeFrames(wire) {
        // Once per larger size seen: the line names the value that admits them.
        if (wire.oversizeSamplesPerFrame <= oversizeShown) return;
        oversizeShown = wire.oversizeSamplesPerFrame;
        statusLine.log(oversizeText(chain.axes.linkStatus, maxSamplesPerFrame)![0]!);
      },
    });
  } catch (error) {
    if (error instanceof OptionError) throw new UsageError(error.message);
    throw error;
  }

  let session: LiveSession | null = null;
  const statusLine = createStatusLine(process.stderr, () => (session === null ? 'waiting' : formatStatus(session.progress, session.link, fitSamples)), quiet);
  for (const note of notes) statusLine.log(`note: ${note}`);
  // The feed listens and the MQTT publisher connects from launch (state "waiting"); both serve the session's own
  // axes from the first samples on, so they share the rows' count, zero and alarms.
  let feedError: Error | null = null;
  const feed: LiveFeed | null = feedSettings === null
    ? null
    : await openLiveFeed(
        feedSettings,
        (error) => {
          feedError = error;
          statusLine.log(`the network feed failed and sends nothing more (${error.message}); the rows go on`);
        },
        (line) => statusLine.log(line),
        commandHandler(chain.axes),
      );
  for (const line of feed?.describe() ?? []) statusLine.log(line);
  const stdout = out === '-' ? openStandardOutput() : undefined;
  const writer: ResultFileWriter | AngleRowWriter =
    angles === null
      ? // A power column when the axis has 3 or 4 outputs, as replay writes it (the frames tell).
        await createResultWriter(out, { format: formatText as ResultFormat, every, power: 'auto', ...(stdout === undefined ? {} : { stdout }) })
      : await createAngleRowWriter(out, { geometry: angles.geometry, every, ...(stdout === undefined ? {} : { stdout }) });
  let recorder: CaptureWriter | null = null;
  let edgeWriter: EdgeWriter | null = null;
  try {
    if (latchOut !== undefined) edgeWriter = await createEdgeWriter(latchOut);
  } catch (error) {
    await writer.abort();
    await feed?.close();
    throw error;
  }
  const edgeLatch = createLiveEdgeLatch();
  const rows = angles === null ? resultRows(writer as ResultFileWriter) : null;
  let gapLines = 0;
  let started = false;
  let wasUp = false;
  sinks.push(
    {
      name: record === undefined ? 'the record' : `the record ${record}`,
      samples(block) {
        const first = !started;
        started = true;
        const outputs = block.axisOutputs[axis];
        if (first) {
          const tracked = angles === null ? [axis] : Array.from({ length: angles.geometry.beams }, (_, k) => k);
          feed?.start(chain.axes, block.rateHz, {
            edges$: chain.axes.readings$.pipe(latchEdges()),
            detectorOutputs: tracked.map((k) => block.axisOutputs[k] ?? 0),
            ...(angles === null ? {} : { geometry: angles.options }),
          });
          if (angles !== null) statusLine.log(`axes X1..X${angles.geometry.beams} (frame axes 0..${angles.geometry.beams - 1}): ${measuredText(angles.geometry)} and the point of interest in the rows`);
        }
        if (first) {
          statusLine.log(
            `first samples: ${block.channelCount} channels, tracking axis ${axis}${outputs === undefined || outputs === 2 ? '' : ` (${outputs} detector outputs)`}, ` +
              `${block.rateHz} Hz (${chain.axes.linkStatus?.rateSource === 'option' ? '--rate-hz' : 'from the frames'})`,
          );
        }
        if (record === undefined) return;
        if (outputs === undefined) return;
        const copy = copyAxis(block, axis);
        return async () => {
          if (first) recorder = await openRecord(record, recordExtension, block.rateHz, port, axis, scale, recordNames(outputs, layout?.names ?? []));
          await recorder!.writeChannels(copy.channels, copy.length);
        };
      },
    },
    {
      name: out === '-' ? 'the result output (standard output)' : `the result output ${out}`,
      positions(positions) {
        if (angles !== null) {
          const block = angleBlock(positions.summaries, positions.rateHz);
          return () => (writer as AngleRowWriter).write(block);
        }
        return rows!(positions);
      },
      notice(notice) {
        if (notice.kind === 'link') {
          const vanished = notice.reason === 'vanished' ? ': the device node is gone or was replaced' : '';
          if (notice.state === 'up') wasUp = true;
          const retry = notice.state === 'down' && notice.reason.startsWith('open failed') ? `; ${retryText(notice.attempt, wasUp)}` : '';
          statusLine.log(`link ${notice.state} (${notice.reason}${vanished})${notice.state === 'up' && notice.gap ? ': samples were lost, marking a gap' : ''}${retry}`);
        } else if (notice.kind === 'gap' || notice.kind === 'duplicate') {
          if (gapLines < MAX_GAP_LINES) {
            const rate = chain.axes.linkStatus?.rateHz ?? Number.NaN;
            const t = rate > 0 ? ` at t = ${(notice.sampleIndex / rate).toFixed(6)} s (sample ${notice.sampleIndex})` : ` at sample ${notice.sampleIndex}`;
            statusLine.log(
              notice.kind === 'duplicate'
                ? `repeated frame ${notice.sequence}${t} dropped: nothing lost, nothing counted twice`
                : notice.cause === 'resync'
                  ? `frame counter restarted or went backwards${t}: gap of unknown length, count lost`
                  : `input gap of ${notice.lostSamples} samples${t} (${notice.cause === 'link' ? 'link outage' : 'sequence jump'}): count lost`,
            );
          } else if (gapLines === MAX_GAP_LINES) statusLine.log('further gaps and repeated frames are counted, not listed');
          gapLines++;
        } else if (notice.kind === 'reference') {
          const rate = chain.axes.linkStatus?.rateHz ?? Number.NaN;
          const t = rate > 0 ? ` (t = ${(notice.sampleIndex / rate).toFixed(6)} s)` : '';
          const what = notice.presetM === 0 ? 'zeroed' : `preset to ${Number((notice.presetM * 1e3).toPrecision(12))} mm`;
          statusLine.log(`${what} axis ${notice.axes.join(', ')} at sample ${notice.sampleIndex}${t} by ${notice.origin}; count_lost cleared from there`);
        } else if (notice.result.ok) {
          const what = notice.result.channels === undefined ? describeCalibration(notice.result.calibration) : describeChannels(notice.result.channels);
          statusLine.log(`fitted the correction to ${notice.result.samples} of the first ${notice.heldSamples} samples (coverage ${(notice.result.coverage * 100).toFixed(0)} %): ${what}`);
        } else {
          statusLine.log(`live fit over ${notice.heldSamples} samples failed (${notice.result.message})${notice.final ? '' : '; holding more samples and retrying'}`);
        }
      },
    },
    {
      name: `the ${MODEL_WATCH_ALARM} log`,
      positions(positions) {
        // Every tracked axis (several with --beam), named when there are several.
        for (const summary of positions.summaries) {
          const axisName = positions.summaries.length > 1 ? ` on axis ${summary.name}` : '';
          for (const event of summary.modelEvents) {
            const t = (event.sampleIndex / positions.rateHz).toFixed(6);
            const what = event.cause === 'radius-change' ? `the mean radius moved by ${(event.value * 100).toFixed(2)} %` : `the radius scatters ${(event.value * 100).toFixed(2)} % RMS`;
            statusLine.log(
              event.state === 'raised'
                ? `${MODEL_WATCH_ALARM}${axisName} at t = ${t} s: the signal left the calibration's model (${what}): recalibrate, or check the source power and alignment`
                : `${MODEL_WATCH_ALARM}${axisName} cleared at t = ${t} s (${what})`,
            );
          }
        }
      },
    },
  );
  if (edgeWriter !== null) {
    sinks.push({
      name: `the edge output ${latchOut}`,
      positions(positions) {
        const edges = edgeLatch.push(positions);
        if (edges.length > 0) return () => edgeWriter!.write(edges);
      },
    });
  }
  statusLine.log(`listening on ${source.name}${layout === null ? `; fitting the correction to the first ${fitSamples} samples (rows held back until then)` : ''}`);

  const controller = new AbortController();
  const stop = () => controller.abort();
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
  const controls: LiveControls = startLiveControls({
    axes: chain.axes,
    stdin: process.stdin,
    presetM: presetMm === undefined ? undefined : presetMm / 1e3,
    stop,
    log: (line) => statusLine.log(line),
  });
  statusLine.log(controls.help);
  changingAir?.start((line) => statusLine.log(line));
  let summary: LiveSummary;
  try {
    session = chain.start(controller.signal);
    summary = await (session as LiveSession).done;
  } catch (error) {
    await feed?.close();
    await writer.abort();
    await (recorder as CaptureWriter | null)?.abort();
    await edgeWriter?.abort();
    statusLine.stop();
    // The chain names its options as the library does; here they are command-line options.
    if (error instanceof Error) error.message = error.message.replace(/\brateHz\b/g, '--rate-hz');
    throw error;
  } finally {
    process.off('SIGINT', stop);
    process.off('SIGTERM', stop);
    controls.dispose();
    changingAir?.stop();
  }
  statusLine.stop();
  await feed?.close();
  // An output that stalled (or was cut off after a signal) cannot be flushed: it is abandoned, the others closed.
  const stalled = summary.stalledSink;
  const finish = async (name: string, output: { close(): Promise<void>; abort(): Promise<void> } | null) => {
    if (output === null) return;
    if (stalled === name) await output.abort();
    else await output.close();
  };
  await finish(sinks[1]!.name, writer);
  await finish(sinks[0]!.name, recorder);
  if (edgeWriter !== null) {
    // The edges whose following samples never came are written from what is known (docs/trigger-edges.md).
    if (stalled !== sinks[2]!.name) await edgeWriter.write(edgeLatch.flush());
    await finish(sinks[2]!.name, edgeWriter);
  }
  if (stalled !== null) stdout?.destroy();
  const progress = summary.progress;
  const link = summary.link;
  const mqttHealth = feed?.mqttHealth ?? null;
  if (values.summary !== undefined) {
    await writeFileAtomically(
      values.summary,
      JSON.stringify({ ...summaryRecord(summary, writer, out, record, calibration, layout?.ellipse === null ? layout.channels : null, maxBufferedBytes, edgeWriter, durationS), environmentLog: environmentLog?.summary() ?? null, environmentTopic: environmentTopic?.summary() ?? null, mqtt: mqttHealth }, null, 2) + '\n',
    );
  }
  if (!quiet) {
    const raised = alarmKinds.filter((kind) => progress.alarmsRaised[kind] > 0).map((kind) => `${alarmNames[kind]} ×${progress.alarmsRaised[kind]}`);
    const counters = link === null
      ? 'the port never opened'
      : link.wire === null
        ? `lines good ${link.text!.linesGood}, malformed ${link.text!.linesMalformed}`
        : `frames good ${link.wire.framesGood}, CRC failures ${link.wire.crcFailures}, resyncs ${link.wire.resyncs}, bytes skipped ${link.wire.bytesSkipped}`;
    const stopped = { duration: `after ${durationS} s of samples received`, signal: 'on a signal', 'source ended': 'because the source ended', stalled: 'because an output stalled' }[summary.stopReason];
    const rate = link?.rateHz ?? Number.NaN;
    process.stderr.write(
      [
        `stopped ${stopped}: ${link?.samplesDelivered ?? 0} samples received, ${progress.samplesProcessed} processed${rate > 0 ? ` at ${rate} Hz` : ''}; wrote ${writer.rowsWritten} rows to ${out}` +
          (record === undefined ? '' : `, ${link?.samplesDelivered ?? 0} samples to ${record}`) +
          (edgeWriter === null ? '' : `, ${edgeWriter.rowsWritten} edge rows to ${latchOut}`),
        ...(progress.samplesProcessed > 0
          ? [`final position ${(progress.positionM * 1e6).toFixed(6)} µm${environmentTopic === null ? uncertaintyText(budgetOf(environment, progress.positionM, 0)) : ''}${progress.countLost ? ' — COUNT LOST: not trustworthy until re-referenced' : ''}`]
          : ['no samples received']),
        `${counters}; ${gapText(summary)}; link outages ${link?.linkDowns ?? 0}`,
        ...(oversizeText(link, maxSamplesPerFrame) ?? []),
        `alarms raised: ${raised.length === 0 ? 'none' : raised.join(', ')}`,
        ...(environmentTopic === null ? [] : [environmentTopic.finalLine()]),
        ...(mqttHealth === null ? [] : [`MQTT: ${mqttHealth.published} messages published; ${mqttHealth.outages} outage(s), ${(mqttHealth.outageMs / 1000).toFixed(1)} s offline${mqttHealth.connections === 0 ? ', never connected' : ''}`]),
      ].join('\n') + '\n',
    );
  }
  const code = summary.stopReason === 'stalled' || feedError !== null ? 1 : 0;
  if (summary.stopReason === 'stalled') {
    process.stderr.write(
      `fringetally listen: ${stalled} accepted nothing while ${maxBufferedBytes / 2 ** 20} MiB of input waited; stopped (read the output faster or raise --input-buffer-mib)\n`,
    );
  }
  if (feedError !== null) {
    process.stderr.write(`fringetally listen: the rows are complete, but the network feed failed: ${(feedError as Error).message}\n`);
  }
  return code;
}

/**
 * Standard output for rows. process.stdout writes to a pipe synchronously, so a reader that stops would freeze
 * the whole process (signals included) inside write(2); a socket of its own on fd 1 writes without blocking, and
 * a pending write can be dropped. Files and terminals do not stall: for them a file stream on fd 1.
 */
function openStandardOutput(): NodeJS.WritableStream & { destroy(): void } {
  const kind = fstatSync(1);
  if (kind.isFIFO() || kind.isSocket()) return new Socket({ fd: 1, readable: false, writable: true });
  return createWriteStream('', { fd: 1, autoClose: false });
}

/** Every gap that shaped the run, by cause, and the repeated frames dropped, for the summary line. */
function gapText(summary: LiveSummary): string {
  const link = summary.link;
  const { sequence, link: outage, resync } = summary.gapsByCause;
  const causes = [
    ...(sequence.count === 0 ? [] : [`${sequence.count} sequence jump(s), ${sequence.lostSamples} lost`]),
    ...(outage.count === 0 ? [] : [`${outage.count} across link outages, ${outage.lostSamples} lost`]),
    ...(resync.count === 0 ? [] : [`${resync.count} counter restart(s), length unknown`]),
  ];
  const gaps = `gaps ${link?.gaps ?? 0}${causes.length === 0 ? '' : ` (${causes.join('; ')})`}`;
  return `${gaps}; repeated frames dropped ${link?.duplicates ?? 0}`;
}

/** Frames the limit refused, with the option that admits them; null when there were none. */
function oversizeText(link: LiveSummary['link'], maxSamplesPerFrame: number): string[] | null {
  if (link === null || link.wire === null || link.wire.oversizeHeaders === 0) return null;
  const { oversizeHeaders, oversizeSamplesPerFrame } = link.wire;
  return [
    `${oversizeHeaders} frame(s) of up to ${oversizeSamplesPerFrame} samples refused: more than --max-samples-per-frame ${maxSamplesPerFrame}; ` +
      `--max-samples-per-frame ${oversizeSamplesPerFrame} admits them`,
  ];
}

/** The retry policy of a port that cannot be opened, for the log line. */
function retryText(attempt: number, wasUp: boolean): string {
  return wasUp ? 'retrying with backoff until stopped' : `retrying with backoff (failed attempt ${attempt}; gives up after ${maxRetriesShown + 1})`;
}
let maxRetriesShown = DEFAULT_OPEN_RETRIES;

/** Every output of axis `axis` of an interleaved block, copied: the block is reused before the record's write runs. */
function copyAxis(block: LinkBlock, axis: number): { channels: Int16Array[]; length: number } {
  const n = block.samplesPerFrame;
  const outputs = block.axisOutputs[axis]!;
  const stride = block.channelCount;
  let first = 0;
  for (let a = 0; a < axis; a++) first += block.axisOutputs[a]!;
  const channels = Array.from({ length: outputs }, (_, c) => {
    const channel = new Int16Array(n);
    for (let i = 0, at = first + c; i < n; i++, at += stride) channel[i] = block.samples[at]!;
    return channel;
  });
  return { channels, length: n };
}

/**
 * The record's column names: x, y for a pair; for 3 or 4 outputs the calibration's names when it has as many (so
 * that `replay --calibration` finds them), else ch1…chN (`replay --channels 1,2,3` picks them either way).
 */
function recordNames(outputs: number, calibrationNames: readonly string[]): string[] | undefined {
  if (outputs === 2) return undefined;
  return calibrationNames.length === outputs ? [...calibrationNames] : Array.from({ length: outputs }, (_, k) => `ch${k + 1}`);
}

/** Every axis' positions and the OR of their alarm bits for one block, copied (the summaries are reused). */
function angleBlock(summaries: readonly AxisBlockSummary[], rateHz: number): AngleRowBlock {
  const length = summaries[0]!.length;
  const flags = new Uint8Array(length);
  for (const summary of summaries) for (let i = 0; i < length; i++) flags[i] |= summary.output.flags[i]!;
  return { firstIndex: summaries[0]!.firstSampleIndex, length, rateHz, positionM: summaries.map((summary) => summary.output.positionM.slice(0, length)), flags };
}

async function openRecord(
  record: string,
  extension: string,
  rateHz: number,
  port: string,
  axis: number,
  scale: { wavelengthM: number; fold: number; refractiveIndex: number },
  names: readonly string[] | undefined,
): Promise<CaptureWriter> {
  if (extension === '.wav' && !Number.isInteger(rateHz)) throw new Error(`a .wav record needs a whole-hertz rate (got ${rateHz} Hz): record to .csv`);
  const metadata = {
    source: `fringetally listen ${port}, axis ${axis}; samples lost in transport are absent (see the listen summary for gaps)`,
    wavelength_nm: formatNumber(scale.wavelengthM * 1e9, 12),
    fold: String(scale.fold),
    refractive_index: String(scale.refractiveIndex),
  };
  const channelCount = names?.length ?? 2;
  return createCaptureWriter(record, extension === '.wav'
    ? { format: 'wav', rateHz, encoding: 'int16', channelCount, metadata }
    : { format: 'csv', rateHz, encoding: 'integer-text', ...(names === undefined ? {} : { channelNames: names }), metadata: { ...metadata, adc: 'int16' } });
}

/** The reading's uncertainty (GUM) for the summary line; the residual periodic error is not measured live. */
function uncertaintyText(budget: ReturnType<typeof budgetOf>): string {
  if (budget === null) return '';
  return ` ± ${(budget.expandedUncertaintyM * 1e9).toFixed(3)} nm (U, k = ${budget.coverageFactor}; periodic residual not included)`;
}

function summaryRecord(
  summary: LiveSummary,
  writer: { readonly rowsWritten: number },
  out: string,
  record: string | undefined,
  calibration: EllipseCalibration | null,
  channels: readonly ChannelParameters[] | null,
  maxBufferedBytes: number,
  edgeWriter: EdgeWriter | null,
  durationS: number | undefined,
) {
  const { progress, link } = summary;
  const rateHz = link !== null && link.rateHz > 0 ? link.rateHz : null;
  const fit = summary.fits.find((attempt) => attempt.result.ok)?.result;
  const okFit = fit !== undefined && fit.ok ? fit : null;
  return {
    stopReason: summary.stopReason,
    stalledOutput: summary.stalledSink,
    inputBufferBytes: maxBufferedBytes,
    rateHz,
    rateSource: link?.rateSource ?? null,
    channelCount: link !== null && link.channelCount > 0 ? link.channelCount : null,
    // --duration counts samples received (the trackLink rule).
    durationSamples: durationS === undefined || rateHz === null ? null : Math.max(1, Math.round(durationS * rateHz)),
    samplesDelivered: link?.samplesDelivered ?? 0,
    samplesProcessed: progress.samplesProcessed,
    nextSampleIndex: link?.nextSampleIndex ?? 0,
    out,
    rowsWritten: writer.rowsWritten,
    record: record ?? null,
    latchOut: edgeWriter === null ? null : { path: edgeWriter.path, rowsWritten: edgeWriter.rowsWritten },
    finalPositionM: progress.samplesProcessed > 0 ? progress.positionM : null,
    countLostAtEnd: progress.countLost,
    calibrationSource: progress.calibration === 'given' ? 'file' : 'live fit',
    // Three or four outputs: their parameters calibrate the axis (the fit's ellipse is of their normalised pair).
    calibration: okFit?.channels === undefined ? (okFit?.calibration ?? calibration) : null,
    channels: okFit?.channels ?? channels,
    detectorOutputs: link !== null && link.axisOutputs.length > 0 ? link.axisOutputs : null,
    fit: okFit === null ? null : { samples: okFit.samples, coverage: okFit.coverage, residualRms: okFit.residualRms },
    wire: link?.wire ? { ...link.wire } : null,
    text: link?.text ? { ...link.text } : null,
    gaps: summary.gaps.map(({ sampleIndex, lostSamples, cause }) => ({ sampleIndex, lostSamples, cause })),
    gapCount: link?.gaps ?? 0,
    lostSamples: link?.lostSamples ?? 0,
    gapsByCause: summary.gapsByCause,
    duplicates: { count: link?.duplicates ?? 0, frames: summary.duplicates.map(({ sampleIndex, sequence }) => ({ sampleIndex, sequence })) },
    link: {
      outages: link?.linkDowns ?? 0,
      returns: link?.linkReturns ?? 0,
      closedByWatchdog: summary.links.filter((event) => event.reason === 'vanished').length,
      events: summary.links.map(({ state, reason, gap, timeMs }) => ({ state, reason, gap, timeMs })),
    },
    alarmsRaised: Object.fromEntries(alarmKinds.map((kind) => [alarmNames[kind], progress.alarmsRaised[kind]])),
    references: summary.references.map(({ axes, sampleIndex, presetM, origin }) => ({ axes, sampleIndex, presetM, origin })),
  };
}

export const listen: Command = { name: 'listen', summary: 'live tracking of wire frames from a serial port', help, run };
