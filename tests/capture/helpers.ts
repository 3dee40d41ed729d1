// Test helpers: a temporary folder per suite, whole-capture collection, an invented two-tone test signal.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { openCapture, type OpenCaptureOptions, type CaptureInfo } from '../../src/io/capture/index.js';

export interface TempDir {
  readonly path: string;
  file(name: string): string;
  remove(): void;
}

export function makeTempDir(): TempDir {
  const path = mkdtempSync(join(tmpdir(), 'fringetally-capture-'));
  return { path, file: (name) => join(path, name), remove: () => rmSync(path, { recursive: true, force: true }) };
}

export interface Collected {
  info: CaptureInfo;
  x: number[];
  y: number[];
  t: number[] | null;
  blockLengths: number[];
  /** Whether every block started where the previous one ended. */
  contiguous: boolean;
  error: unknown;
}

/** Reads a whole capture, copying each block (the reader reuses its arrays); a rejection is kept, not thrown. */
export async function collect(path: string, options: OpenCaptureOptions = {}): Promise<Collected> {
  const capture = await openCapture(path, options);
  const result: Collected = { info: capture.info, x: [], y: [], t: null, blockLengths: [], contiguous: true, error: null };
  try {
    for await (const block of capture.blocks()) {
      if (block.firstIndex !== result.x.length) result.contiguous = false;
      if (block.x.length !== block.length || block.y.length !== block.length) result.contiguous = false;
      result.blockLengths.push(block.length);
      result.x.push(...block.x);
      result.y.push(...block.y);
      if (block.t !== null) (result.t ??= []).push(...block.t);
    }
  } catch (error) {
    result.error = error;
  }
  return result;
}

/** Invented quadrature test signal: a slow sine pair as a fringe train, with amplitudes in ADC counts. */
export function quadratureCounts(samples: number, amplitude: number): { x: Int32Array; y: Int32Array } {
  const x = new Int32Array(samples);
  const y = new Int32Array(samples);
  for (let n = 0; n < samples; n++) {
    const phase = 2 * Math.PI * (0.013 * n + 0.00002 * n * n);
    x[n] = Math.round(amplitude * Math.cos(phase) + 0.05 * amplitude * Math.sin(0.3 * n));
    y[n] = Math.round(0.8 * amplitude * Math.sin(phase + 0.1));
  }
  return { x, y };
}
