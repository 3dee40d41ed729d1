// Positions at trigger edges over the whole live chain: version 2 frames of a known motion (constant
// acceleration, invented) with edges at known sub-sample times → decoder → pipeline → latchEdges. Each position
// must lie within the stated interpolation bound plus the samples' own error (int16 rounding of noise-free
// detector signals: about 1/12000 rad, 4e-12 m; 2e-11 m allowed, as tests/live/track-link.test.ts does).
import { lastValueFrom, toArray } from 'rxjs';
import { describe, expect, it } from 'vitest';
import { AlarmBit, createQuadratureSynthesizer } from '../../src/core/index.js';
import { latchEdges, trackLink } from '../../src/io/live/index.js';
import { createManualByteSource } from '../../src/io/serial/index.js';
import { encodeWireFrame, wireFrameLengthOf, type WireEdge } from '../../src/io/wire/index.js';

const ellipse = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const RATE = 100_000;
const SPF = 64;
const WAVELENGTH = 632.9908e-9;
// m/s², invented: 0.0058 m/s after 192 samples, under the 0.0158 m/s limit of λ·f_s/(2·fold) (common practice).
const ACCELERATION = 2;
const V0 = 0.002;
const position = (t: number) => V0 * t + (ACCELERATION * t * t) / 2;
const SAMPLE_ERROR_M = 2e-11;

/**
 * Frames of a motion, with an edge at each of `edgeTimes` (absolute sample times), its lead truncated to 2^-16;
 * edge i on the line and with the polarity `lineOf(i)` gives (default: alternating trigger rising, mark falling).
 */
function frames(
  frameCount: number,
  edgeTimes: readonly number[],
  motion: (t: number) => number = position,
  lineOf: (i: number) => { line: number; rising: boolean } = (i) => ({ line: i % 2, rising: i % 2 === 0 }),
): Uint8Array[] {
  const n = frameCount * SPF;
  const phase = Float64Array.from({ length: n }, (_, i) => (4 * Math.PI * motion(i / RATE)) / WAVELENGTH);
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  createQuadratureSynthesizer({ ellipse, noiseRms: 0, adc: { kind: 'int16' } }).process(phase, x, y, n);
  return Array.from({ length: frameCount }, (_, f) => {
    const edges: WireEdge[] = edgeTimes
      .map((t, i) => ({ sample: Math.ceil(t) - f * SPF, lead: Math.floor((Math.ceil(t) - t) * 65536), ...lineOf(i) }))
      .filter((edge) => edge.sample >= 0 && edge.sample < SPF);
    const samples = Array.from({ length: 2 * SPF }, (_, i) => (i % 2 === 0 ? x : y)[f * SPF + (i >> 1)]!);
    const header = { sequence: f, channelCount: 2, samplesPerFrame: SPF, sampleRateHz: RATE, sampleCounter: f * SPF, edges };
    const out = new Uint8Array(wireFrameLengthOf(header));
    encodeWireFrame(header, samples, out);
    return out;
  });
}

describe('positions at trigger edges through the live chain', () => {
  it('edges at known sub-sample times on a known motion come out within the stated bound', async () => {
    // Edges inside frames, at a frame's first sample (lead reaching into the previous frame) and at its last.
    const edgeTimes = [10.3, 63.999, 64.0001, 100.5, 127.75, 128 + 7 / 65536, 191 - 0.5];
    const source = createManualByteSource();
    const live = trackLink(source, { axes: [{ name: 'X', wavelengthM: WAVELENGTH, fold: 2, calibration: ellipse }] });
    const edges = lastValueFrom(live.readings$.pipe(latchEdges(), toArray()));
    source.linkUp();
    for (const frame of frames(3, edgeTimes)) source.write(frame);
    source.end();
    const results = await edges;
    expect(results.map((e) => e.sampleTime)).toEqual(edgeTimes.map((t) => Math.ceil(t) - Math.floor((Math.ceil(t) - t) * 65536) / 65536));
    for (const [i, edge] of results.entries()) {
      const truth = position(edgeTimes[i]! / RATE);
      expect(Math.abs(edge.positionM - truth), `edge at ${edgeTimes[i]}`).toBeLessThanOrEqual(edge.uncertaintyM + SAMPLE_ERROR_M);
      expect(edge).toMatchObject({ kind: 'edge', axis: 'X', axisIndex: 0, line: i % 2, rising: i % 2 === 0, rateHz: RATE });
      expect(edge.timeS).toBeCloseTo(edge.sampleTime / RATE, 15);
    }
    // The bound: 1.25·a·T²/8 = 3.1e-11 m at most from the motion; the second differences also carry the samples'
    // rounding (some 1e-11 m), so it stays under 0.1 nm here.
    expect(Math.max(...results.map((e) => e.uncertaintyM))).toBeLessThan(1e-10);
  });

  it('a rising reference mark re-references the axes: the position at the mark reads zero, count lost cleared', async () => {
    const velocity = 0.004; // m/s, invented constant motion
    const mark = 150.3;
    const source = createManualByteSource();
    const live = trackLink(source, { axes: [{ name: 'X', wavelengthM: WAVELENGTH, fold: 2, calibration: ellipse }] });
    const rows: { index: number; position: number; countLost: boolean }[] = [];
    const done = lastValueFrom(live.readings$.pipe(toArray()));
    live.readings$.subscribe((reading) => {
      if (reading.kind !== 'positions') return;
      const x = reading.summaries[0]!;
      for (let i = 0; i < x.length; i++) rows.push({ index: x.firstSampleIndex + i, position: x.output.positionM[i]!, countLost: (x.output.flags[i]! & AlarmBit.countLost) !== 0 });
    });
    source.linkUp();
    // A trigger edge (line 0, no effect on the reference) and the mark (line 1); frame 1 is lost (count lost).
    const sent = frames(4, [40.5, mark], (t) => velocity * t, (i) => ({ line: i, rising: true }));
    source.write(sent[0]!);
    source.write(sent[2]!);
    source.write(sent[3]!);
    source.end();
    await done;
    const at = (index: number) => rows.find((row) => row.index === index)!;
    // Before the mark: from the first sample. After it: from the mark, to the samples' own error (2e-11 m).
    expect(Math.abs(at(40).position - (velocity * 40) / RATE)).toBeLessThan(SAMPLE_ERROR_M);
    expect(at(150).countLost).toBe(true);
    for (const index of [151, 180, 255]) {
      expect(Math.abs(at(index).position - (velocity * (index - mark)) / RATE), `sample ${index}`).toBeLessThan(SAMPLE_ERROR_M);
      expect(at(index).countLost).toBe(false);
    }
  });

  it('a duration that cuts a block keeps only the edges of the samples before the cut', async () => {
    // 80 samples: the cut falls in the second frame; the edge at 79.5 belongs to sample 80, which is not kept.
    const source = createManualByteSource();
    const live = trackLink(source, { axes: [{ name: 'X', wavelengthM: WAVELENGTH, fold: 2, calibration: ellipse }], durationS: 80 / RATE });
    const edges = lastValueFrom(live.readings$.pipe(latchEdges(), toArray()));
    source.linkUp();
    for (const frame of frames(3, [10.3, 78.5, 79.5, 100.5])) source.write(frame);
    source.end();
    expect((await edges).map((edge) => Math.ceil(edge.sampleTime))).toEqual([11, 79]);
  });

  it('reReference zeroes or presets at the next sample on demand', () => {
    const source = createManualByteSource();
    const live = trackLink(source, { axes: [{ name: 'X', wavelengthM: WAVELENGTH, fold: 2, calibration: ellipse }] });
    const firsts: number[] = [];
    const subscription = live.readings$.subscribe((reading) => {
      if (reading.kind === 'positions') firsts.push(reading.summaries[0]!.output.positionM[0]!);
    });
    live.reReference(); // before any sample: nothing to do
    source.linkUp();
    const sent = frames(3, [], (t) => 0.004 * t);
    source.write(sent[0]!);
    live.reReference({ presetM: 0.0125 });
    source.write(sent[1]!);
    live.reReference({ axis: 0 });
    source.write(sent[2]!);
    expect(firsts).toEqual([0, 0.0125, 0]);
    expect(() => live.reReference({ axis: 1 })).toThrow('axis must be an integer in 0..0 (got 1)');
    subscription.unsubscribe();
  });
});
