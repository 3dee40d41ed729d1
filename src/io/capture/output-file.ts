// Output that is never passed off as complete: bytes go to a temporary file beside the target, renamed only on commit.
import { randomBytes } from 'node:crypto';
import { open, rename, unlink, type FileHandle } from 'node:fs/promises';
import { basename, dirname, join } from 'node:path';

/** A sequential byte sink. Files are written to a temporary name and renamed by `commit`; `discard` removes them. */
export interface OutputSink {
  /** The target as given; `-` for standard output. */
  readonly target: string;
  /** True when bytes can be overwritten later with `writeAt` (files, not streams). */
  readonly seekable: boolean;
  write(bytes: Uint8Array, length: number): Promise<void>;
  /** Overwrites bytes already written (header patching); only when `seekable`. */
  writeAt(bytes: Uint8Array, length: number, position: number): Promise<void>;
  /** Flushes, closes and (for files) renames to the target. */
  commit(): Promise<void>;
  /** Stops; a temporary file is closed and removed. Never throws for a sink already finished. */
  discard(): Promise<void>;
}

/** The temporary name beside `target`: hidden, with `.partial` so nobody takes it for a finished capture. */
export function temporaryPathFor(target: string): string {
  return join(dirname(target), `.${basename(target)}.${process.pid}-${randomBytes(4).toString('hex')}.partial`);
}

/** A system error re-worded to name the file the user gave (the system's names the temporary file, or none). */
function fileError(target: string, error: unknown): Error {
  const failure = error as NodeJS.ErrnoException;
  const reason = failure.code === 'ENOSPC' ? 'the disk is full' : failure.code === 'EISDIR' ? 'it is a folder' : (failure.code ?? failure.message);
  return Object.assign(new Error(`${target}: cannot write the output (${reason})`), { code: failure.code });
}

/**
 * Writes `text` to `target` through a temporary file renamed at the end, so the target is either the whole new
 * text or untouched; the temporary file is removed on every failure.
 */
export async function writeFileAtomically(target: string, text: string): Promise<void> {
  const sink = await openFileSink(target);
  try {
    const bytes = Buffer.from(text, 'utf8');
    await sink.write(bytes, bytes.length);
    await sink.commit();
  } catch (error) {
    await sink.discard().catch(() => undefined);
    throw error;
  }
}

export async function openFileSink(target: string): Promise<OutputSink> {
  const temporary = temporaryPathFor(target);
  let handle: FileHandle;
  try {
    handle = await open(temporary, 'wx');
  } catch (error) {
    // The system message names the temporary file; the user knows only the target.
    const failure = error as NodeJS.ErrnoException;
    throw Object.assign(new Error(`${target}: cannot create the output file (${failure.code ?? failure.message}, in ${dirname(target)})`), { code: failure.code });
  }
  let position = 0;
  let finished = false;
  return {
    target,
    seekable: true,
    async write(bytes, length) {
      let done = 0;
      try {
        while (done < length) {
          const { bytesWritten } = await handle.write(bytes, done, length - done, position);
          done += bytesWritten;
          position += bytesWritten;
        }
      } catch (error) {
        throw fileError(target, error);
      }
    },
    async writeAt(bytes, length, at) {
      let done = 0;
      while (done < length) done += (await handle.write(bytes, done, length - done, at + done)).bytesWritten;
    },
    async commit() {
      if (finished) throw new Error(`${target}: output already finished`);
      finished = true;
      try {
        await handle.datasync();
        await handle.close();
        await rename(temporary, target);
      } catch (error) {
        // Whatever failed (full disk at the flush, a folder or another device at the target), no partial file stays.
        await handle.close().catch(() => undefined);
        await unlink(temporary).catch(() => undefined);
        throw fileError(target, error);
      }
    },
    async discard() {
      if (finished) return;
      finished = true;
      await handle.close().catch(() => undefined);
      await unlink(temporary);
    },
  };
}

/**
 * A sink over a writable stream (standard output). A stream cannot be renamed: what was written stays written, and
 * `discard` only stops further output. The caller signals an incomplete result by its error message and exit code.
 */
export function openStreamSink(stream: NodeJS.WritableStream, target = '-'): OutputSink {
  let failure: Error | null = null;
  const onError = (error: Error): void => {
    failure = error;
  };
  stream.on('error', onError);
  let finished = false;
  const release = (): void => {
    finished = true;
    stream.off('error', onError);
  };
  return {
    target,
    seekable: false,
    async write(bytes, length) {
      if (failure !== null) throw failure;
      // The stream keeps the chunk until it is flushed, so hand it a copy: the caller reuses its buffer.
      const accepted = stream.write(Buffer.from(bytes.subarray(0, length)));
      if (!accepted) {
        await new Promise<void>((resolve, reject) => {
          const settle = (error?: Error): void => {
            stream.off('drain', settle);
            stream.off('error', settle);
            if (error === undefined) resolve();
            else reject(error);
          };
          stream.on('drain', settle);
          stream.on('error', settle);
        });
      }
    },
    async writeAt() {
      throw new Error(`${target}: a stream cannot be rewritten in place`);
    },
    async commit() {
      if (finished) throw new Error(`${target}: output already finished`);
      release();
      if (failure !== null) throw failure;
    },
    async discard() {
      if (!finished) release();
    },
  };
}
