// The ellipse fit's passes over a capture file, for calibrate and replay (and the position input of the
// commands that take a capture). Constant memory for any file length.

import {
  createDetectorFit,
  spreadWindows,
  type ChannelParameters,
  type EllipseFitMethodOptions,
  type EllipseFitResult,
} from '../src/core/index.js';
import { createFastEllipseAccumulator } from '../src/accel/index.js';
import { openCapture, openCaptureParts, type BlockSamples, type CaptureBlock, type CaptureInfo, type KeptParts, type OpenCaptureOptions } from '../src/io/capture/index.js';
import { CAPTURE_BLOCK_SAMPLES, PART_READ_BYTES } from './capture-analyses.js';
import { RUN_READ_BYTES } from './capture-run.js';
import type { Progress } from './progress.js';

/** Samples of the fit's first (gate-finding) pass over a long WAV capture, spread over it (`spreadWindows`). */
export const GATE_SAMPLES = 1 << 20;

/**
 * Fits the ellipse with the library's detector fit (`createDetectorFit`: for 3 or 4 outputs a source-power pass
 * first, then the two-pass gated fit), reading the file once per pass; the sums in WebAssembly where it exists
 * (`createFastEllipseAccumulator`: the same sums to the bit). The first pass of the two-pass fit only finds the
 * second pass's gate: on a WAV capture of at least 4 · GATE_SAMPLES it reads GATE_SAMPLES samples spread over the
 * capture (`spreadWindows`) as a part (`endPass(true)`), so a clean capture is read about once and a capture with
 * samples near the gate's bounds twice; the fit is the same as from every sample in every case. `keep`, given the
 * capture's info, may name parts to keep from the last pass over every sample (`kept`: complete when that pass
 * went through), for a later step that then need not read them again.
 */
export async function fitCapture(
  path: string,
  open: OpenCaptureOptions,
  fitOptions: EllipseFitMethodOptions,
  progress: Progress,
  keep?: (info: CaptureInfo) => KeptParts | null,
): Promise<{ fit: EllipseFitResult; info: CaptureInfo; totalSamples: number; channels?: readonly ChannelParameters[]; kept: KeptParts | null }> {
  const fit = createDetectorFit({ ...fitOptions, channelCount: open.channels?.length ?? 2, createAccumulator: createFastEllipseAccumulator });
  const labels = [' (source power)', '', ' (refined)'];
  const feed = (block: CaptureBlock<BlockSamples>) => fit.add(fit.channelCount === 2 ? [block.x, block.y] : block.channels, block.length);
  let totalSamples = 0;
  let spreadTried = false;
  let kept: KeptParts | null | undefined;
  for (;;) {
    // A pass over every sample reads as much at a time as the pipeline's run (RUN_READ_BYTES: fewer round trips), and
    // an int16 capture's blocks as stored: the accumulator sums int16 pairs as they are (the same sums).
    const capture = await openCapture(path, { readChunkBytes: RUN_READ_BYTES, ...open, blockSize: CAPTURE_BLOCK_SAMPLES, int16Blocks: true });
    const windows = fit.pass === 1 && !spreadTried ? spreadWindows(capture.info.totalSamples, GATE_SAMPLES) : null;
    if (windows !== null) {
      spreadTried = true;
      await capture.close();
      const total = windows.reduce((sum, [, count]) => sum + count, 0);
      progress.start(`fit ${path} (gate, from ${total} samples spread over it)`, total);
      let done = 0;
      try {
        for await (const part of openCaptureParts(path, { readChunkBytes: PART_READ_BYTES, ...open, blockSize: CAPTURE_BLOCK_SAMPLES }, windows)) {
          for await (const block of part.blocks()) {
            feed(block);
            progress.update((done += block.length));
          }
        }
      } finally {
        progress.stop();
      }
      fit.endPass(true); // null: a provisional gate, or a failure of the part that sends the first pass over every sample
      continue;
    }
    progress.start(`fit ${path}${labels[fit.pass]}`, capture.info.totalSamples);
    if (kept === undefined) kept = keep?.(capture.info) ?? null;
    kept?.reset();
    try {
      for await (const block of capture.blocks()) {
        feed(block);
        kept?.add(block);
        totalSamples = block.firstIndex + block.length;
        progress.update(totalSamples);
      }
    } finally {
      progress.stop();
      await capture.close();
    }
    const pass = fit.pass;
    const result = fit.endPass();
    if (result === null) continue;
    if (!result.ok && pass === 0) {
      // The source-power pass refused the outputs: name them.
      return { fit: { ...result, message: `outputs ${capture.info.channels.join(',')}: ${result.message}` }, info: capture.info, totalSamples, kept: null };
    }
    const { channels, ...ellipse } = result;
    return { fit: ellipse as EllipseFitResult, info: capture.info, totalSamples, ...(channels === undefined ? {} : { channels }), kept: kept ?? null };
  }
}
