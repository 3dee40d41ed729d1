// The calibration_stale alarm. Check values: the bounds are the stage's stated defaults (5 % of the radius; RMS
// scatter 3× the fit's residual, at least 1 %), and a ghost beam of weight g adds a radius term g·cos((k−1)φ + θ)
// whose RMS is g/√2 (Wu & Deslattes, Appl. Opt. 37(28), 1998, published; see docs/references.md). Signals are invented.
import { describe, expect, it } from 'vitest';
import { createModelWatch, createRandom, OptionError, type ModelWatchEvent } from '../../src/core/index.js';

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

  it('checks its options once', () => {
    expect(() => createModelWatch({ maxRadiusChange: 0 })).toThrow(OptionError);
    expect(() => createModelWatch({ windowSamples: 3 })).toThrow(OptionError);
    expect(createModelWatch({ fitResidualRms: 0.01 }).options.maxRadiusRms).toBeCloseTo(0.03, 12);
  });
});
