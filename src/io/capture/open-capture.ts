// Opens a capture file, CSV or WAV, told apart by its first bytes (then its extension), for one streaming pass.
import { open, type FileHandle } from 'node:fs/promises';
import { extname } from 'node:path';
import { openCsvCapture } from './csv-reader.js';
import { CaptureFormatError } from './errors.js';
import { resolveCaptureOptions } from './resolved-options.js';
import { OptionError } from '../../core/options.js';
import type { BlockSamples, Capture, CaptureFormat, Int16BlockOptions, OpenCaptureOptions } from './types.js';
import { openWavCapture } from './wav-reader.js';
import { readWavLayout } from './wav-header.js';

const SNIFF_BYTES = 4096;

/**
 * Opens `path` and reads its header (and, for CSV, a look at the first rows) so that `info` is complete; samples
 * follow from `blocks()`. Option errors throw RangeError; file content errors reject with CaptureFormatError. With
 * `int16Blocks: true` (Int16BlockOptions), an int16 capture's x and y come as Int16Array, as stored.
 */
export async function openCapture(path: string, options: Int16BlockOptions): Promise<Capture<BlockSamples>>;
export async function openCapture(path: string, options?: OpenCaptureOptions): Promise<Capture>;
export async function openCapture(path: string, options: OpenCaptureOptions = {}): Promise<Capture<BlockSamples>> {
  const resolved = resolveCaptureOptions(options);
  const handle = await openHandle(path);
  try {
    const format = resolved.format ?? (await sniffFormat(path, handle));
    if (format === 'csv' && (resolved.startSample !== 0 || resolved.sampleCount !== null)) {
      const [option, value] = resolved.startSample !== 0 ? ['startSample', resolved.startSample] : ['sampleCount', resolved.sampleCount];
      throw new OptionError(option, `left out: ${path} is CSV, which is read from the start`, value);
    }
    return format === 'wav' ? await openWavCapture(path, handle, resolved) : await openCsvCapture(path, handle, resolved);
  } catch (error) {
    await handle.close();
    throw error;
  }
}

/** The file opened for reading, refused with the path in the message when it cannot be read (or is a folder). */
async function openHandle(path: string): Promise<FileHandle> {
  let handle;
  try {
    handle = await open(path, 'r');
  } catch (error) {
    throw fileOpenError(path, error);
  }
  try {
    // Opening a folder succeeds; reading it fails with EISDIR and no path in the message.
    if ((await handle.stat()).isDirectory()) throw fileOpenError(path, Object.assign(new Error('is a directory'), { code: 'EISDIR' }));
    return handle;
  } catch (error) {
    await handle.close();
    throw error;
  }
}

/**
 * Opens the parts of a WAV capture given as [startSample, sampleCount] one after another, over one file handle and
 * one reading of its header: a part's first read starts as the part before it is taken, so that it overlaps that
 * part's reading (each read is a round trip to the thread pool; opening the file for each part took four or five
 * more). Read each part's blocks before taking the next; the file closes when the loop ends, early or not.
 * `options` as openCapture's, without the range; a part of a CSV capture is refused as openCapture refuses it.
 */
export async function* openCaptureParts(
  path: string,
  options: Omit<OpenCaptureOptions, 'startSample' | 'sampleCount'>,
  parts: readonly (readonly [startSample: number, sampleCount: number])[],
): AsyncGenerator<Capture, void, undefined> {
  if (parts.length === 0) return;
  const resolvedParts = parts.map(([startSample, sampleCount]) => resolveCaptureOptions({ ...options, startSample, sampleCount }));
  const handle = await openHandle(path);
  let ahead: Promise<Capture> | null = null;
  try {
    const first = resolvedParts[0]!;
    if ((first.format ?? (await sniffFormat(path, handle))) === 'csv') {
      // openCapture's refusal of a range of a CSV capture (the handle closes below).
      yield await openCapture(path, { ...options, startSample: parts[0]![0], sampleCount: parts[0]![1] });
      return;
    }
    const shared = { layout: await readWavLayout(path, handle), release: async () => undefined };
    // Float64Array blocks: the options have no int16Blocks.
    const opening = (k: number) => {
      const part = openWavCapture(path, handle, resolvedParts[k]!, shared) as Promise<Capture>;
      part.catch(() => undefined); // thrown where it is awaited, below
      return part;
    };
    ahead = opening(0);
    for (let k = 0; k < parts.length; k++) {
      const part: Capture = await ahead!;
      ahead = k + 1 < parts.length ? opening(k + 1) : null;
      yield part;
    }
  } finally {
    // A part opened ahead has its first read in flight: closing the handle waits for it.
    await ahead?.catch(() => undefined);
    await handle.close();
  }
}

function fileOpenError(path: string, error: unknown): Error {
  const failure = error as NodeJS.ErrnoException;
  const reason = failure.code === 'ENOENT' ? 'no such file' : failure.code === 'EISDIR' ? 'is a folder, not a capture file' : failure.code === 'EACCES' ? 'permission denied' : (failure.code ?? failure.message);
  return Object.assign(new Error(`${path}: cannot open the capture (${reason})`), { code: failure.code });
}

/** RIFF/WAVE magic means WAV; otherwise text (no control bytes but tab, CR, LF) means CSV unless the name says WAV. */
async function sniffFormat(path: string, handle: Awaited<ReturnType<typeof open>>): Promise<CaptureFormat> {
  const head = Buffer.alloc(SNIFF_BYTES);
  const { bytesRead } = await handle.read(head, 0, SNIFF_BYTES, 0);
  if (bytesRead >= 12 && head.toString('latin1', 0, 4) === 'RIFF' && head.toString('latin1', 8, 12) === 'WAVE') return 'wav';
  const extension = extname(path).toLowerCase();
  if (extension === '.wav' || extension === '.wave') return 'wav';
  for (let i = 0; i < bytesRead; i++) {
    const byte = head[i]!;
    if (byte < 0x20 && byte !== 0x09 && byte !== 0x0a && byte !== 0x0d) {
      throw new CaptureFormatError({
        file: path,
        byteOffset: i,
        expected: 'a RIFF/WAVE file (starting "RIFF", form "WAVE") or CSV text',
        got: `byte 0x${byte.toString(16).padStart(2, '0')}; the file starts with ${head.subarray(0, Math.min(bytesRead, 12)).toString('hex')}`,
      });
    }
  }
  if (bytesRead === 0) {
    throw new CaptureFormatError({ file: path, byteOffset: 0, expected: 'a RIFF/WAVE file or CSV text, not an empty file' });
  }
  return 'csv';
}
