// `fringetally listen`: live tracking over a serial link: wire frames (or text lines) in, result rows out, with an
// optional raw record, a status line on a terminal, and a JSON summary of the link and decoder counters.
import { extname } from 'node:path';
import { alarmKinds, alarmNames, type EllipseCalibration } from '../../src/core/index.js';
import { createCaptureWriter, writeFileAtomically, type CaptureWriter } from '../../src/io/capture/index.js';
import { createResultWriter, type ResultFormat, type ResultWriter } from '../../src/io/results/index.js';
import { createSerialByteSource } from '../../src/io/serial/index.js';
import { WIRE_MAX_SAMPLES_PER_FRAME } from '../../src/io/wire/index.js';
import { readCalibrationFile } from '../calibration-file.js';
import { checkFiles, formatNumber, LASER_CAUTION, numberOption, parseCommandLine, UsageError, type Command } from '../cli-kit.js';
import { startLiveSession, type LiveNotice, type LiveSink, type LiveStatus, type LiveSummary } from '../live/live-session.js';
import { createStatusLine, formatStatus } from '../live/status-line.js';
import { lengthScaleOf, measureOptionHelp, measureOptionSpecs } from '../measure-options.js';
import { budgetOf, environmentOf, environmentOptionHelp, environmentOptionSpecs, withConfig } from '../environment-options.js';
import { feedOptionHelp, feedOptionSpecs, feedSettingsOf, openLiveFeed, type LiveFeed } from '../live/live-feed.js';

const DEFAULT_FIT_SAMPLES = 16384;
/** Gap lines printed; later gaps are only counted (the summary keeps them all, up to its own limit). */
const MAX_GAP_LINES = 20;

const help = `Usage: fringetally listen --port PATH --baud N --wavelength-nm L --fold F --out FILE|- [--format csv|jsonl]
                          [--duration S] [--every N] [--record FILE] [--calibration cal.json] [options]

Live tracking over a serial link (or pseudo-terminal): decodes fringetally wire frames (docs/wire-format.md),
runs the pipeline and writes rows with the same columns as replay: t (s, counted from the sample stream: the first
sample received is t = 0, lost samples included), position_m (m, relative to the first sample), velocity_m_s
(m/s), level (corrected radius over calibrated radius), alarms (active alarms, space-separated). Stops after
--duration S seconds of samples or on SIGINT/SIGTERM; files are complete only after a clean stop.

Without --calibration the correction is fitted live to the first --fit-samples samples; those rows are held back
until the fit is made (none are lost), then written. The stage must move over at least about one fringe then.
Lost samples (sequence gaps, CRC failures, link outages) enter the pipeline as an input gap: input_gap on the next
row, and count_lost on every row after it. After a link outage at least 1 sample is counted lost; the frame
counter gives the true number when the device kept counting (see docs/live.md).

Options:
  --port PATH              serial device or pseudo-terminal (required); reopened with backoff when it vanishes
  --baud N                 baud rate, Bd (default 921600)
  --out FILE|-             result file, .csv or .jsonl (or --format with -, standard output) (required)
  --format csv|jsonl       result format when the file name does not tell
  --every N                write every Nth sample (default 1)
  --duration S             stop after S seconds of samples (default: until SIGINT/SIGTERM)
  --record FILE            also write every received sample of the axis to a capture (.csv int16 text or .wav int16)
  --summary FILE           write a JSON summary: counters, gaps, link events, alarms, calibration
  --calibration FILE       calibration from fringetally calibrate (default: live fit)
  --fit-samples N          samples for the live fit, 64..16777216 (default ${DEFAULT_FIT_SAMPLES}); retried up to 8 times
  --rate-hz R              sample rate, Hz, when the frames carry no rate field (required with --text)
  --axis K                 axis to track in multi-axis frames: channels 2K (x) and 2K+1 (y) (default 0)
  --max-samples-per-frame N  largest frame accepted, 1..${WIRE_MAX_SAMPLES_PER_FRAME} (default 1024)
  --text                   read "x,y" text lines instead of binary frames (no gap detection: bring-up only)
  --channels N             with --text: integers per line, even (default 2·(axis+1))
  --retry-ms MS            first reopen delay after the port vanished, ms (default 200, doubling to 5000)
  --quiet                  no log lines, status line or summary on stderr
${measureOptionHelp}
${environmentOptionHelp}
${feedOptionHelp}

On a terminal, stderr shows a status line (position, velocity, level, alarms, frames, CRC failures, gaps, link),
redrawn at most 5 times per second.

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
  calibration: { type: 'string' },
  'fit-samples': { type: 'string' },
  'rate-hz': { type: 'string' },
  axis: { type: 'string' },
  'max-samples-per-frame': { type: 'string' },
  text: { type: 'boolean' },
  channels: { type: 'string' },
  'retry-ms': { type: 'string' },
  quiet: { type: 'boolean' },
  ...measureOptionSpecs,
  ...environmentOptionSpecs,
  ...feedOptionSpecs,
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

async function run(argv: readonly string[]): Promise<number> {
  const parsed = parseCommandLine(argv, optionSpecs, false);
  // The repeatable feed options stay out of the config merge, which takes single values.
  const { 'allow-origin': allowOrigins, proxy: proxies, ...single } = parsed.values;
  const { 'allow-origin': _allowOriginSpec, proxy: _proxySpec, ...singleSpecs } = optionSpecs;
  const values = withConfig(single, singleSpecs) as typeof single;
  const port = values.port;
  if (port === undefined) throw new UsageError('--port is required');
  const out = values.out;
  if (out === undefined) throw new UsageError('--out is required');
  const extension = extname(out).toLowerCase();
  const formatText = values.format ?? (extension === '.jsonl' ? 'jsonl' : extension === '.csv' ? 'csv' : undefined);
  if (formatText !== 'csv' && formatText !== 'jsonl') throw new UsageError(`cannot tell the result format of "${out}": use .csv, .jsonl or --format csv|jsonl`);
  const baudRate = integerOption('baud', values.baud, 921600, 1, 20_000_000);
  const every = integerOption('every', values.every, 1, 1, 1_000_000_000);
  const durationS = numberOption('duration', values.duration);
  if (durationS !== undefined && !(durationS > 0)) throw new UsageError(`--duration must be positive (got ${values.duration})`);
  const rateHz = numberOption('rate-hz', values['rate-hz']);
  if (rateHz !== undefined && !(rateHz > 0)) throw new UsageError(`--rate-hz must be positive (got ${values['rate-hz']})`);
  const axis = integerOption('axis', values.axis, 0, 0, 7);
  const textMode = values.text === true;
  if (textMode && rateHz === undefined) throw new UsageError('--text needs --rate-hz: text lines carry no sample rate');
  if (!textMode && values.channels !== undefined) throw new UsageError('--channels applies to --text only: frames state their channel count');
  const channels = integerOption('channels', values.channels, 2 * (axis + 1), 2, 16);
  if (channels % 2 !== 0 || channels < 2 * axis + 2) throw new UsageError(`--channels must be even and at least ${2 * axis + 2} for axis ${axis} (got ${channels})`);
  const maxSamplesPerFrame = integerOption('max-samples-per-frame', values['max-samples-per-frame'], 1024, 1, WIRE_MAX_SAMPLES_PER_FRAME);
  const fitSamples = integerOption('fit-samples', values['fit-samples'], DEFAULT_FIT_SAMPLES, 64, 2 ** 24);
  const retryDelayMs = integerOption('retry-ms', values['retry-ms'], 200, 1, 600_000);
  const record = values.record;
  const recordExtension = record === undefined ? '' : extname(record).toLowerCase();
  if (record !== undefined && recordExtension !== '.csv' && recordExtension !== '.wav') throw new UsageError(`--record must end in .csv or .wav (got "${record}")`);
  if (recordExtension === '.wav' && rateHz !== undefined && !Number.isInteger(rateHz)) {
    throw new UsageError(`a .wav record needs a whole-hertz rate (got --rate-hz ${rateHz}): record to .csv instead`);
  }
  const quiet = values.quiet === true;
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
    ],
    [
      { option: '--out', path: out },
      ...(record === undefined ? [] : [{ option: '--record', path: record }]),
      ...(values.summary === undefined ? [] : [{ option: '--summary', path: values.summary }]),
    ],
  );
  const calibration = values.calibration === undefined ? null : await readCalibrationFile(values.calibration);
  const source = createSerialByteSource({ path: port, baudRate, retryDelayMs, maxRetryDelayMs: Math.max(5000, retryDelayMs) });

  let status: Readonly<LiveStatus> | null = null;
  const statusLine = createStatusLine(process.stderr, () => (status === null ? 'waiting' : formatStatus(status, fitSamples)), quiet);
  for (const note of notes) statusLine.log(`note: ${note}`);
  statusLine.log(`listening on ${source.name}${calibration === null ? `; fitting the correction to the first ${fitSamples} samples (rows held back until then)` : ''}`);

  const writer: ResultWriter = await createResultWriter(out, { format: formatText as ResultFormat, every });
  let feedError: Error | null = null;
  // The feed listens and the MQTT publisher connects from launch; both start serving with the first samples.
  let feed: LiveFeed | null = null;
  if (feedSettings !== null) {
    try {
      feed = await openLiveFeed(
        feedSettings,
        (error) => {
          feedError = error;
          statusLine.log(`the network feed failed and sends nothing more (${error.message}); the rows go on`);
        },
        (line) => statusLine.log(line),
      );
    } catch (error) {
      await writer.abort();
      throw error;
    }
    for (const line of feed.describe()) statusLine.log(line);
  }
  let fittedCalibration: EllipseCalibration | null = calibration;
  let recorder: CaptureWriter | null = null;
  let gapLines = 0;
  const sink: LiveSink = {
    async start(info) {
      statusLine.log(`first samples: ${info.channelCount} channels, tracking axis ${info.axis}, ${info.rateHz} Hz (${info.rateSource === 'frames' ? 'from the frames' : '--rate-hz'})`);
      if (record === undefined) return;
      if (recordExtension === '.wav' && !Number.isInteger(info.rateHz)) throw new Error(`a .wav record needs a whole-hertz rate (got ${info.rateHz} Hz): record to .csv`);
      const metadata = {
        source: `fringetally listen ${port}, axis ${info.axis}; samples lost in transport are absent (see the listen summary for gaps)`,
        wavelength_nm: formatNumber(scale.wavelengthM * 1e9, 12),
        fold: String(scale.fold),
        refractive_index: String(scale.refractiveIndex),
      };
      recorder = await createCaptureWriter(record, recordExtension === '.wav'
        ? { format: 'wav', rateHz: info.rateHz, encoding: 'int16', metadata }
        : { format: 'csv', rateHz: info.rateHz, encoding: 'integer-text', metadata: { ...metadata, adc: 'int16' } });
    },
    raw(x, y, length) {
      return recorder?.write(x, y, length);
    },
    async block(block) {
      if (feed !== null) {
        if (!feed.started) feed.start({ rateHz: block.rateHz, settings: scale, calibration: fittedCalibration });
        feed.push(block);
      }
      await writer.write(block);
    },
    notice(notice: LiveNotice) {
      if (notice.kind === 'link') {
        const { event } = notice;
        const vanished = event.reason === 'vanished' ? ': the device node is gone or was replaced' : '';
        statusLine.log(`link ${event.state} (${event.reason}${vanished})${event.state === 'up' && event.gap ? ': samples were lost, marking a gap' : ''}`);
      } else if (notice.kind === 'gap') {
        const { gap } = notice;
        if (gapLines < MAX_GAP_LINES) {
          const t = status === null || !(status.rateHz > 0) ? '' : ` at t = ${(gap.sampleIndex / status.rateHz).toFixed(6)} s`;
          statusLine.log(
            gap.cause === 'resync'
              ? `frame counter restarted or went backwards${t}: gap of unknown length, count lost`
              : `input gap of ${gap.lostSamples} samples${t} (${gap.cause === 'link' ? 'link outage' : 'sequence jump'}): count lost`,
          );
        } else if (gapLines === MAX_GAP_LINES) statusLine.log('further gaps are counted, not listed');
        gapLines++;
      } else if (notice.fit.ok) {
        fittedCalibration = notice.fit.calibration;
        statusLine.log(`fitted the correction to ${notice.fit.samples} of the first ${notice.heldSamples} samples (coverage ${(notice.fit.coverage * 100).toFixed(0)} %): ${describeCalibration(notice.fit.calibration)}`);
      } else {
        statusLine.log(`live fit over ${notice.heldSamples} samples failed (${notice.fit.message})${notice.final ? '' : '; holding more samples and retrying'}`);
      }
    },
  };

  const controller = new AbortController();
  const stop = () => controller.abort();
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
  let summary: LiveSummary;
  try {
    const session = startLiveSession({
      source,
      mode: textMode ? 'text' : 'binary',
      axis,
      textChannels: channels,
      maxSamplesPerFrame,
      rateHz,
      settings: scale,
      calibration,
      fitSamples,
      durationS,
      sinks: [sink],
      signal: controller.signal,
    });
    status = session.status;
    summary = await session.done;
    await (feed as LiveFeed | null)?.close();
    await writer.close();
    await (recorder as CaptureWriter | null)?.close();
  } catch (error) {
    await (feed as LiveFeed | null)?.close();
    await writer.abort();
    await (recorder as CaptureWriter | null)?.abort();
    throw error;
  } finally {
    process.off('SIGINT', stop);
    process.off('SIGTERM', stop);
    statusLine.stop();
  }
  const final = summary.status;
  const mqttHealth = (feed as LiveFeed | null)?.mqttHealth ?? null;
  if (values.summary !== undefined) await writeFileAtomically(values.summary, JSON.stringify({ ...summaryRecord(summary, writer, out, record), mqtt: mqttHealth }, null, 2) + '\n');
  if (!quiet) {
    const raised = alarmKinds.filter((kind) => final.alarmsRaised[kind] > 0).map((kind) => `${alarmNames[kind]} ×${final.alarmsRaised[kind]}`);
    const counters = final.wire === null
      ? `lines good ${final.text!.linesGood}, malformed ${final.text!.linesMalformed}`
      : `frames good ${final.wire.framesGood}, CRC failures ${final.wire.crcFailures}, resyncs ${final.wire.resyncs}, bytes skipped ${final.wire.bytesSkipped}`;
    const stopped = summary.stopReason === 'duration' ? `after ${durationS} s of samples` : summary.stopReason === 'signal' ? 'on a signal' : 'because the source ended';
    process.stderr.write(
      [
        `stopped ${stopped}: ${final.samplesProcessed} samples processed${final.rateHz > 0 ? ` at ${final.rateHz} Hz` : ''}; wrote ${writer.rowsWritten} rows to ${out}` +
          (record === undefined ? '' : `, ${final.samplesDelivered} samples to ${record}`),
        ...(final.samplesProcessed > 0
          ? [`final position ${(final.positionM * 1e6).toFixed(6)} µm${uncertaintyText(budgetOf(environment, final.positionM, 0))}${final.countLost ? ' — COUNT LOST: not trustworthy until re-referenced' : ''}`]
          : ['no samples received']),
        `${counters}; gaps ${final.gaps} (${final.lostSamples} samples lost); link outages ${final.linkDowns}`,
        `alarms raised: ${raised.length === 0 ? 'none' : raised.join(', ')}`,
        ...(mqttHealth === null ? [] : [`MQTT: ${mqttHealth.published} messages published; ${mqttHealth.outages} outage(s), ${(mqttHealth.outageMs / 1000).toFixed(1)} s offline${mqttHealth.connections === 0 ? ', never connected' : ''}`]),
      ].join('\n') + '\n',
    );
  }
  if (feedError !== null) {
    process.stderr.write(`fringetally listen: the rows are complete, but the network feed failed: ${(feedError as Error).message}\n`);
    return 1;
  }
  return 0;
}

/** The reading's uncertainty (GUM) for the summary line; the residual periodic error is not measured live. */
function uncertaintyText(budget: ReturnType<typeof budgetOf>): string {
  if (budget === null) return '';
  return ` ± ${(budget.expandedUncertaintyM * 1e9).toFixed(3)} nm (U, k = ${budget.coverageFactor}; periodic residual not included)`;
}

function summaryRecord(summary: LiveSummary, writer: ResultWriter, out: string, record: string | undefined) {
  const { status } = summary;
  return {
    stopReason: summary.stopReason,
    rateHz: status.rateHz > 0 ? status.rateHz : null,
    rateSource: summary.info?.rateSource ?? null,
    channelCount: summary.info?.channelCount ?? null,
    axis: summary.info?.axis ?? null,
    samplesDelivered: status.samplesDelivered,
    samplesProcessed: status.samplesProcessed,
    nextSampleIndex: status.nextSampleIndex,
    out,
    rowsWritten: writer.rowsWritten,
    record: record ?? null,
    finalPositionM: status.samplesProcessed > 0 ? status.positionM : null,
    countLostAtEnd: status.countLost,
    calibrationSource: status.calibration === 'file' ? 'file' : 'live fit',
    calibration: summary.calibration,
    fit: summary.fit === null ? null : { samples: summary.fit.samples, coverage: summary.fit.coverage, residualRms: summary.fit.residualRms },
    wire: status.wire === null ? null : { ...status.wire },
    text: status.text === null ? null : { ...status.text },
    gaps: summary.gaps,
    gapCount: status.gaps,
    lostSamples: status.lostSamples,
    link: { outages: status.linkDowns, returns: status.linkReturns, closedByWatchdog: summary.links.filter((event) => event.reason === 'vanished').length, events: summary.links.map(({ state, reason, gap, timeMs }) => ({ state, reason, gap, timeMs })) },
    alarmsRaised: Object.fromEntries(alarmKinds.map((kind) => [alarmNames[kind], status.alarmsRaised[kind]])),
  };
}

export const listen: Command = { name: 'listen', summary: 'live tracking of wire frames from a serial port', help, run };
