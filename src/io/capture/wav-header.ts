// RIFF/WAVE header parsing by positional reads: fmt (PCM, IEEE float, WAVE_FORMAT_EXTENSIBLE), LIST/INFO, data.
// Layout after the Microsoft/IBM "Multimedia Programming Interface and Data Specifications 1.0" (1991, RIFF and WAVE)
// and Microsoft's WAVE_FORMAT_EXTENSIBLE definition (mmreg.h / ksmedia.h): little-endian sizes, chunks padded to even.
import type { FileHandle } from 'node:fs/promises';
import { CaptureFormatError } from './errors.js';
import { parseMetadataLine } from './metadata.js';

export const WAVE_FORMAT_PCM = 0x0001;
export const WAVE_FORMAT_IEEE_FLOAT = 0x0003;
export const WAVE_FORMAT_EXTENSIBLE = 0xfffe;
/** Bytes 2..15 of the KSDATAFORMAT_SUBTYPE_* GUIDs (…-0000-0010-8000-00aa00389b71); bytes 0..1 hold the format tag. */
export const SUBFORMAT_GUID_TAIL = Uint8Array.of(0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71);
/** LIST/INFO text longer than this is skipped rather than read into memory. */
const MAX_INFO_BYTES = 65_536;

export type WavSampleEncoding = 'int16' | 'int24' | 'float32';

export interface WavLayout {
  readonly encoding: WavSampleEncoding;
  readonly channels: number;
  readonly rateHz: number;
  /** Bytes per sample frame (all channels). */
  readonly blockAlign: number;
  /** File offset of the first sample byte. */
  readonly dataOffset: number;
  /** Sample bytes the data chunk declares. */
  readonly dataBytes: number;
  /** File offset of the data chunk header, for messages. */
  readonly dataChunkOffset: number;
  /** `key: value` lines of the LIST/INFO comment (ICMT) before the data chunk. */
  readonly metadata: Map<string, string>;
  /** Bytes of the file that no chunk accounts for (after the last well-formed chunk); they are not read. */
  readonly ignoredBytes: number;
  /** The RIFF chunk size + 8, which should equal the file size. */
  readonly riffBytes: number;
  readonly fileBytes: number;
}

interface FmtChunk {
  readonly encoding: WavSampleEncoding;
  readonly channels: number;
  readonly rateHz: number;
  readonly blockAlign: number;
}

export async function readWavLayout(file: string, handle: FileHandle): Promise<WavLayout> {
  const fileBytes = (await handle.stat()).size;
  const head = Buffer.alloc(12);
  const headBytes = (await handle.read(head, 0, 12, 0)).bytesRead;
  if (headBytes < 4 || head.toString('latin1', 0, 4) !== 'RIFF') {
    throw new CaptureFormatError({ file, byteOffset: 0, expected: 'the RIFF magic "RIFF"', got: printable(head, 0, Math.min(4, headBytes)) });
  }
  if (headBytes < 12 || head.toString('latin1', 8, 12) !== 'WAVE') {
    throw new CaptureFormatError({ file, byteOffset: 8, expected: 'the form type "WAVE"', got: printable(head, 8, headBytes) });
  }
  let fmt: FmtChunk | null = null;
  const metadata = new Map<string, string>();
  const chunkHeader = Buffer.alloc(8);
  let offset = 12;
  for (;;) {
    const got = (await handle.read(chunkHeader, 0, 8, offset)).bytesRead;
    if (got < 8) {
      throw new CaptureFormatError({
        file,
        byteOffset: offset,
        expected: got === 0 ? 'a "data" chunk before the end of the file' : 'an 8-byte chunk header (id, size)',
      });
    }
    const id = chunkHeader.toString('latin1', 0, 4);
    const size = chunkHeader.readUInt32LE(4);
    const body = offset + 8;
    if (id === 'data') {
      if (fmt === null) throw new CaptureFormatError({ file, byteOffset: offset, expected: 'a "fmt " chunk before the "data" chunk' });
      if (size === 0xffffffff) {
        throw new CaptureFormatError({
          file,
          byteOffset: offset + 4,
          expected: 'the data chunk size (0xFFFFFFFF is the placeholder of an unfinished or streamed write)',
        });
      }
      const ignoredBytes = size > fileBytes - body ? 0 : fileBytes - (await endOfChunks(handle, body + size + (size & 1), fileBytes));
      return { ...fmt, dataOffset: body, dataBytes: size, dataChunkOffset: offset, metadata, ignoredBytes, riffBytes: head.readUInt32LE(4) + 8, fileBytes };
    }
    if (body + size > fileBytes) {
      throw new CaptureFormatError({
        file,
        byteOffset: fileBytes,
        expected: `${body + size - fileBytes} more bytes of the "${printable(chunkHeader, 0, 4)}" chunk at byte ${offset} (it declares ${size} bytes)`,
      });
    }
    if (id === 'fmt ') fmt = await readFmt(file, handle, body, size);
    else if (id === 'LIST' && size >= 4 && size <= MAX_INFO_BYTES) await readInfo(handle, body, size, metadata);
    offset = body + size + (size & 1);
  }
}

/**
 * Where the chunks after the data chunk end: chunks with a printable id that fit in the file (a LIST/INFO written
 * after the samples is common) are skipped; anything else, such as samples beyond a data size that was never
 * updated, is where the file stops making sense.
 */
async function endOfChunks(handle: FileHandle, offset: number, fileBytes: number): Promise<number> {
  const header = Buffer.alloc(8);
  while (offset + 8 <= fileBytes) {
    await handle.read(header, 0, 8, offset);
    const size = header.readUInt32LE(4);
    const printableId = header.subarray(0, 4).every((byte) => byte >= 0x20 && byte <= 0x7e);
    if (!printableId || offset + 8 + size > fileBytes) break;
    offset += 8 + size + (size & 1);
  }
  return Math.min(offset, fileBytes);
}

async function readFmt(file: string, handle: FileHandle, offset: number, size: number): Promise<FmtChunk> {
  if (size < 16) throw new CaptureFormatError({ file, byteOffset: offset - 4, expected: 'a "fmt " chunk of at least 16 bytes', got: String(size) });
  const fmt = Buffer.alloc(Math.min(size, 40));
  await handle.read(fmt, 0, fmt.length, offset);
  let tag = fmt.readUInt16LE(0);
  const channels = fmt.readUInt16LE(2);
  const rateHz = fmt.readUInt32LE(4);
  const blockAlign = fmt.readUInt16LE(12);
  const bits = fmt.readUInt16LE(14);
  if (tag === WAVE_FORMAT_EXTENSIBLE) {
    if (size < 40 || fmt.readUInt16LE(16) < 22) {
      throw new CaptureFormatError({ file, byteOffset: offset + 16, expected: 'a 22-byte extension (cbSize 22) in a WAVE_FORMAT_EXTENSIBLE "fmt " chunk' });
    }
    const guidTail = fmt.subarray(26, 40);
    if (!guidTail.equals(SUBFORMAT_GUID_TAIL)) {
      throw new CaptureFormatError({ file, byteOffset: offset + 24, expected: 'a KSDATAFORMAT_SUBTYPE PCM or IEEE_FLOAT sub-format GUID', got: fmt.subarray(24, 40).toString('hex') });
    }
    tag = fmt.readUInt16LE(24);
  }
  let encoding: WavSampleEncoding;
  if (tag === WAVE_FORMAT_PCM && bits === 16) encoding = 'int16';
  else if (tag === WAVE_FORMAT_PCM && bits === 24) encoding = 'int24';
  else if (tag === WAVE_FORMAT_IEEE_FLOAT && bits === 32) encoding = 'float32';
  else {
    const kind = tag === WAVE_FORMAT_PCM ? 'PCM' : tag === WAVE_FORMAT_IEEE_FLOAT ? 'IEEE float' : `format tag 0x${tag.toString(16).padStart(4, '0')}`;
    throw new CaptureFormatError({
      file,
      byteOffset: offset,
      expected: '16- or 24-bit integer PCM (tag 1) or 32-bit IEEE float (tag 3)',
      got: `${kind}, ${bits} bits`,
    });
  }
  if (channels < 2) throw new CaptureFormatError({ file, byteOffset: offset + 2, expected: 'at least 2 channels (x and y)', got: String(channels) });
  if (rateHz === 0) throw new CaptureFormatError({ file, byteOffset: offset + 4, expected: 'a sample rate above 0 Hz', got: '0' });
  if (blockAlign !== (channels * bits) / 8) {
    throw new CaptureFormatError({ file, byteOffset: offset + 12, expected: `block align ${(channels * bits) / 8} (${channels} channels of ${bits} bits)`, got: String(blockAlign) });
  }
  return { encoding, channels, rateHz, blockAlign };
}

/** Collects `key: value` lines of the ICMT (comment) entry of a LIST/INFO chunk; other lists and entries are skipped. */
async function readInfo(handle: FileHandle, offset: number, size: number, metadata: Map<string, string>): Promise<void> {
  const list = Buffer.alloc(size);
  await handle.read(list, 0, size, offset);
  if (list.toString('latin1', 0, 4) !== 'INFO') return;
  let at = 4;
  while (at + 8 <= size) {
    const id = list.toString('latin1', at, at + 4);
    const length = list.readUInt32LE(at + 4);
    const end = Math.min(size, at + 8 + length);
    if (id === 'ICMT') {
      for (const line of list.toString('utf8', at + 8, end).replace(/\0+$/, '').split(/\r?\n/)) {
        const entry = parseMetadataLine(`#${line}`);
        if (entry !== null) metadata.set(entry[0], entry[1]);
      }
    }
    at = at + 8 + length + (length & 1);
  }
}

function printable(bytes: Uint8Array, start: number, end: number): string {
  let text = '';
  for (let i = start; i < end; i++) {
    const byte = bytes[i]!;
    text += byte >= 0x20 && byte < 0x7f ? String.fromCharCode(byte) : `\\x${byte.toString(16).padStart(2, '0')}`;
  }
  return text;
}
