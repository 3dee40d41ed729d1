// calibrate reads the first fit pass of a long WAV capture (which only finds the second pass's gate) from samples
// spread over it, and checks the gate on the second pass: the calibration is the library's two-pass fit over
// every sample, bit for bit; without a report its residual analysis reads only the blocks it takes, and writes the
// same file as with one (every block run). The capture is invented: an ellipse with noise and a partly blocked beam.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createCaptureWriter } from '../../src/io/capture/index.js';
import { createQuadratureSynthesizer, createTwoPassFit, spreadWindows, type EllipseFitResult } from '../../src/core/index.js';
import { GATE_SAMPLES } from '../../tools/fit-capture.js';
import { fringetally } from './cli.js';

let dir = '';
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'fringetally-gate-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const N = 4 * GATE_SAMPLES + 1000;
const ellipse = { offsetX: 300, offsetY: -200, amplitudeX: 12000, amplitudeY: 10500, phaseErrorRad: 0.08 };

describe('calibrate on a long WAV capture', () => {
  it('gives the two-pass fit of every sample, its first pass read from samples spread over the capture', async () => {
    expect(spreadWindows(N, GATE_SAMPLES)).not.toBeNull();
    const phase = Float64Array.from({ length: N }, (_, i) => (400 * Math.PI * i) / N);
    const x = new Float64Array(N);
    const y = new Float64Array(N);
    createQuadratureSynthesizer({ ellipse, noiseRms: 0.003 * ellipse.amplitudeX, seed: 7 }).process(phase, x, y, N);
    for (let i = 0; i < N; i++) {
      const radius = i > N / 3 && i < N / 3 + 50_000 ? 0.3 : 1; // a blocked beam the gate keeps out
      x[i] = Math.round(ellipse.offsetX + (x[i]! - ellipse.offsetX) * radius);
      y[i] = Math.round(ellipse.offsetY + (y[i]! - ellipse.offsetY) * radius);
    }
    const writer = await createCaptureWriter(join(dir, 'long.wav'), { format: 'wav', rateHz: 1e6, encoding: 'int16' });
    await writer.write(x, y, N);
    await writer.close();
    const run = await fringetally(['calibrate', 'long.wav', '--out', 'long.json', '--quiet'], dir);
    expect(run.code, run.stderr).toBe(0);
    const written = JSON.parse(readFileSync(join(dir, 'long.json'), 'utf8'));

    const fit = createTwoPassFit();
    let result: EllipseFitResult | null = null;
    while (result === null) {
      for (let start = 0; start < N; start += 4096) fit.add(x.subarray(start, start + 4096), y.subarray(start, start + 4096), Math.min(4096, N - start));
      result = fit.endPass();
    }
    if (!result.ok) throw new Error(result.message);
    expect(result.samples).toBe(N - 50_000);
    for (const key of ['offsetX', 'offsetY', 'amplitudeX', 'amplitudeY', 'phaseErrorRad'] as const) expect(written[key]).toBe(result.calibration[key]);
    expect(written.fit).toMatchObject({ samples: result.samples, residualRms: result.residualRms });

    // Without a report only the analysed blocks are read for the residual (analyseCapture); with one, every block:
    // the same file but for its time of writing.
    const full = await fringetally(['calibrate', 'long.wav', '--out', 'long-full.json', '--report', 'long.html', '--quiet'], dir);
    expect(full.code, full.stderr).toBe(0);
    const whole = JSON.parse(readFileSync(join(dir, 'long-full.json'), 'utf8'));
    expect(written.residual.analysedEvery).toBeGreaterThan(1);
    expect({ ...written, createdAt: '' }).toEqual({ ...whole, createdAt: '' });
  }, 60_000);
});
