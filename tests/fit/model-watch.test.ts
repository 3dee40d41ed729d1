// The calibration_stale alarm. Check values: the bounds are the stage's stated defaults (5 % of the radius; RMS
// scatter 3× the fit's residual, at least 1 %), and a ghost beam of weight g adds a radius term g·cos((k−1)φ + θ)
// whose RMS is g/√2 (Wu & Deslattes, Appl. Opt. 37(28), 1998, published; see docs/references.md). Signals are invented.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { createModelWatch, createRandom, MODEL_WATCH_CHUNK_SAMPLES, OptionError, type ModelWatchEvent } from '../../src/core/index.js';

function run(radiusAt: (i: number) => number, ghostAt: (i: number) => number, length: number, block = 1000) {
  const watch = createModelWatch({ fitResidualRms: 0.002 });
  const random = createRandom(11);
  const events: ModelWatchEvent[] = [];
  const u = new Float64Array(block);
  const v = new Float64Array(block);
  for (let start = 0; start < length; start += block) {
    for (let k = 0; k < block; k++) {
      const i = start + k;
      const phase = (2 * Math.PI * i) / 200;
      const r = radiusAt(i);
      const g = ghostAt(i);
      u[k] = r * Math.cos(phase) + g * Math.cos(3 * phase) + 0.002 * random.gaussian();
      v[k] = r * Math.sin(phase) + g * Math.sin(3 * phase) + 0.002 * random.gaussian();
    }
    watch.process(u, v, block, start, events);
  }
  return { events, watch };
}

describe('calibration_stale', () => {
  it('stays quiet while the signal keeps to the calibration', () => {
    expect(run(() => 1, () => 0, 100_000).events).toEqual([]);
  });

  it('is raised when the source power drops 8 % and cleared when it comes back', () => {
    const { events } = run((i) => (i >= 30_000 && i < 60_000 ? 0.92 : 1), () => 0, 100_000);
    expect(events.map((e) => e.state)).toEqual(['raised', 'cleared']);
    // A step first shows as scatter of the window: 8 %·√(x(1 − x)) passes 1 % once the new level holds a share
    // x ≈ 1.6 % of the memory, about 65 samples after the step.
    expect(events[0]).toMatchObject({ cause: 'radius-scatter' });
    expect(events[0]!.sampleIndex).toBeGreaterThan(30_000);
    expect(events[0]!.sampleIndex).toBeLessThan(30_000 + 200);
    expect(events[1]!.sampleIndex).toBeGreaterThan(60_000);
  });

  it('names a slow drift of the mean radius as a radius change, once the running mean passes 5 %', () => {
    const { events } = run((i) => 1 - (0.1 * i) / 100_000, () => 0, 100_000);
    expect(events).toHaveLength(1);
    expect(events[0]).toMatchObject({ state: 'raised', cause: 'radius-change' });
    // The mean lags a ramp by one memory: 5 % is passed near 5 % + 0.1·4096/100 000 ≈ sample 54 100.
    expect(events[0]!.sampleIndex).toBeGreaterThan(52_000);
    expect(events[0]!.sampleIndex).toBeLessThan(56_000);
  });

  it('is raised by a ghost beam that appears (radius scatter g/√2 beyond 1 %)', () => {
    const { events } = run(() => 1, (i) => (i >= 40_000 ? 0.03 : 0), 100_000);
    expect(events).toHaveLength(1);
    expect(events[0]).toMatchObject({ state: 'raised', cause: 'radius-scatter' });
  });

  it('decides exactly as the plain form of its definition, chunk by chunk, with radii hovering at its bounds and samples left out', () => {
    // The definition written out plainly as the reference: valid radii taken 16 at a time into exponentially
    // forgetting sums, the alarm judged on each chunk's last sample from the mean and RMS. The watch under test
    // carries partial chunks across blocks of any size and skips masked and non-finite samples.
    function plain(radius: Float64Array, use: Uint8Array, windowSamples: number, maxChange: number, maxRms: number): ModelWatchEvent[] {
      const decay = (1 - 1 / windowSamples) ** MODEL_WATCH_CHUNK_SAMPLES;
      const events: ModelWatchEvent[] = [];
      let w = 0, s = 0, q = 0, active = false;
      let cause: ModelWatchEvent['cause'] = 'radius-change';
      const chunk: number[] = [];
      for (let i = 0; i < radius.length; i++) {
        const r = radius[i]!;
        if (!use[i] || !Number.isFinite(r) || r <= 0) continue;
        chunk.push(r);
        if (chunk.length < MODEL_WATCH_CHUNK_SAMPLES) continue;
        let cs = 0, cq = 0;
        for (const value of chunk) {
          cs += value;
          cq += value * value;
        }
        chunk.length = 0;
        w = decay * w + MODEL_WATCH_CHUNK_SAMPLES;
        s = decay * s + cs;
        q = decay * q + cq;
        if (w < windowSamples / 2) continue;
        const mean = s / w;
        const rms = Math.sqrt(Math.max(0, q / w - mean * mean));
        const change = Math.abs(mean - 1);
        if (!active) {
          if (change > maxChange || rms > maxRms) {
            active = true;
            cause = change > maxChange ? 'radius-change' : 'radius-scatter';
            events.push({ sampleIndex: i, state: 'raised', cause, value: cause === 'radius-change' ? mean - 1 : rms });
          }
        } else if (change < 0.8 * maxChange && rms < 0.8 * maxRms) {
          active = false;
          events.push({ sampleIndex: i, state: 'cleared', cause, value: cause === 'radius-change' ? mean - 1 : rms });
        }
      }
      return events;
    }
    fc.assert(
      fc.property(
        fc.integer({ min: 16, max: 256 }),
        fc.double({ min: 0.01, max: 0.2, noNaN: true }),
        fc.double({ min: 0.005, max: 0.05, noNaN: true }),
        fc.array(fc.tuple(fc.double({ min: -1.3, max: 1.3, noNaN: true }), fc.double({ min: 0, max: 1.5, noNaN: true }), fc.integer({ min: 1, max: 400 })), { minLength: 1, maxLength: 12 }),
        fc.integer({ min: 1, max: 500 }),
        fc.integer({ min: 0, max: 40 }),
        fc.boolean(),
        (windowSamples, maxRadiusChange, maxRadiusRms, stretches, block, holeEvery, masked) => {
          // Stretches whose mean change and scatter sit at chosen fractions of the bounds (1 = on the bound); with
          // holeEvery > 0, every holeEvery-th sample masked and every (holeEvery + 3)-th not finite.
          const values: number[] = [];
          for (const [changeFraction, scatterFraction, length] of stretches) {
            for (let k = 0; k < length; k++) values.push(1 + changeFraction * maxRadiusChange + (k % 2 === 0 ? 1 : -1) * scatterFraction * maxRadiusRms);
          }
          const radius = Float64Array.from(values, (r, i) => (holeEvery > 0 && i % (holeEvery + 3) === 0 ? Number.NaN : r));
          // Without a mask (masked false) only the non-finite samples are left out.
          const use = Uint8Array.from(values, (_, i) => (masked && holeEvery > 0 && i % holeEvery === 0 ? 0 : 1));
          const watch = createModelWatch({ windowSamples, maxRadiusChange, maxRadiusRms });
          const events: ModelWatchEvent[] = [];
          for (let start = 0; start < radius.length; start += block) {
            const end = Math.min(radius.length, start + block);
            watch.processRadius(radius.subarray(start, end), end - start, start, events, masked ? use.subarray(start, end) : undefined);
          }
          expect(events).toEqual(plain(radius, use, windowSamples, maxRadiusChange, maxRadiusRms));
        },
      ),
      { numRuns: 300 },
    );
  });

  it('reads the same from (u, v) as from their radii, and starts afresh after reset', () => {
    const random = createRandom(5);
    const length = 20_000;
    const u = new Float64Array(length);
    const v = new Float64Array(length);
    const radius = new Float64Array(length);
    for (let i = 0; i < length; i++) {
      const r = (i < 10_000 ? 1 : 0.9) + 0.004 * random.gaussian();
      u[i] = r * Math.cos(i / 30);
      v[i] = r * Math.sin(i / 30);
      radius[i] = Math.sqrt(u[i]! * u[i]! + v[i]! * v[i]!);
    }
    const watch = createModelWatch();
    const fromPair: ModelWatchEvent[] = [];
    watch.process(u, v, length, 0, fromPair);
    expect(fromPair.map((e) => e.state)).toEqual(['raised']);
    watch.reset();
    const fromRadius: ModelWatchEvent[] = [];
    watch.processRadius(radius, length, 0, fromRadius);
    expect(fromRadius).toEqual(fromPair);
  });

  it('checks its options once', () => {
    expect(() => createModelWatch({ maxRadiusChange: 0 })).toThrow(OptionError);
    expect(() => createModelWatch({ windowSamples: 3 })).toThrow(OptionError);
    expect(createModelWatch({ fitResidualRms: 0.01 }).options.maxRadiusRms).toBeCloseTo(0.03, 12);
  });
});
