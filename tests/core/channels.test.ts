// Checks of the three- and four-output signal chain: same count, position and alarms as the two-channel chain on
// the same motion, the power reading and its alarm, saturation on the raw outputs, block-split invariance.
// Check values: the simulated true phase; λ_vac = 632.9908 nm (CIPM Recommendation 2, 2007, published).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { AlarmBit, createChannelPipeline, createPipeline, type AlarmEvent, type ChannelPipelineOptions } from '../../src/core/index.js';
import { detectorOutputs, FOUR_OUTPUTS, UNBALANCED_THREE } from '../support/detector-outputs.js';

const HE_NE_M = 632.9908e-9;
const options: ChannelPipelineOptions = { rateHz: 1e6, wavelengthM: HE_NE_M, fold: 2, channels: UNBALANCED_THREE, adc: { kind: 'float', fullScale: 10 } };

function outputs(n: number) {
  return { positionM: new Float64Array(n), velocityMS: new Float64Array(n), level: new Float32Array(n), flags: new Uint8Array(n), power: new Float32Array(n) };
}

function runChannels(channels: Float64Array[], chosen: ChannelPipelineOptions = options, split: number[] = []) {
  const n = channels[0]!.length;
  const pipeline = createChannelPipeline(chosen);
  const out = outputs(n);
  const events: AlarmEvent[] = [];
  let start = 0;
  for (const end of [...split, n]) {
    pipeline.process(
      channels.map((channel) => channel.subarray(start, end)),
      end - start,
      {
        positionM: out.positionM.subarray(start, end),
        velocityMS: out.velocityMS.subarray(start, end),
        level: out.level.subarray(start, end),
        flags: out.flags.subarray(start, end),
        power: out.power.subarray(start, end),
      },
      events,
    );
    start = end;
  }
  return { out, events };
}

/** A move of `fringes` fringes, out and partly back, at up to 0.05 fringe per sample. */
function move(n: number, fringes: number): Float64Array {
  return Float64Array.from({ length: n }, (_, i) => 2 * Math.PI * fringes * (Math.sin((Math.PI * i) / n) ** 2 * 0.7 + (0.3 * i) / n));
}

describe('channel pipeline', () => {
  it('counts and measures as the two-channel chain does on the same motion, with a drifting source', () => {
    const n = 8000;
    const phase = move(n, 40);
    const { channels, power } = detectorOutputs(UNBALANCED_THREE, phase, { power: (i) => 1 + 0.2 * Math.sin((2 * Math.PI * i) / n) });
    const three = runChannels(channels);
    // The two-channel chain on an ideal pair of the same phase.
    const pair = createPipeline({ rateHz: 1e6, wavelengthM: HE_NE_M, fold: 2, adc: { kind: 'float', fullScale: 10 } });
    const two = outputs(n);
    pair.process(Float64Array.from(phase, Math.cos), Float64Array.from(phase, Math.sin), n, two, []);
    for (let i = 0; i < n; i += 97) {
      expect(three.out.positionM[i]).toBeCloseTo(two.positionM[i]!, 15);
      expect(three.out.velocityMS[i]).toBeCloseTo(two.velocityMS[i]!, 9);
      expect(three.out.level[i]).toBeCloseTo(1, 6);
      expect(three.out.power[i]).toBeCloseTo(power[i]!, 6);
    }
    // 40·0.7·0 + 0.3·40 = 12 fringes net: 12 · λ/2.
    expect(three.out.positionM[n - 1]! / (HE_NE_M / 2)).toBeCloseTo((phase[n - 1]! - phase[0]!) / (2 * Math.PI), 9);
    expect(three.events).toEqual([]);
  });

  it('raises low power, not low signal, when the light dims; both when it is blocked; the count survives the dimming', () => {
    const n = 6000;
    const phase = move(n, 20);
    const dim = (i: number) => (i >= 1000 && i < 2000 ? 0.35 : i >= 4000 && i < 4100 ? 0 : 1);
    const { channels } = detectorOutputs(UNBALANCED_THREE, phase, { power: dim });
    const { out, events } = runChannels(channels);
    const kinds = events.map((event) => `${event.kind}:${event.state}@${event.sampleIndex}`);
    expect(kinds.slice(0, 2)).toEqual(['lowPower:raised@1000', 'lowPower:cleared@2031']);
    expect(kinds).toContain('lowPower:raised@4000');
    expect(kinds).toContain('lowSignal:raised@4000');
    // Dimmed to 0.35: the pair is scaled by the 0.5 floor, level 0.7, above the low-signal level 0.3.
    expect(out.level[1500]).toBeCloseTo(0.7, 6);
    expect(out.flags[1500]).toBe(AlarmBit.lowPower);
    expect(out.positionM[3999]! / (HE_NE_M / 2)).toBeCloseTo((phase[3999]! - phase[0]!) / (2 * Math.PI), 6);
  });

  it('judges saturation on the raw outputs', () => {
    const n = 500;
    const { channels } = detectorOutputs(UNBALANCED_THREE, move(n, 2));
    channels[2]![100] = 10; // at full scale
    const { out, events } = runChannels(channels);
    expect(events[0]).toMatchObject({ kind: 'saturation', state: 'raised', sampleIndex: 100, value: 10 });
    expect(out.flags[100]! & AlarmBit.saturation).toBe(AlarmBit.saturation);
    expect(events[1]).toMatchObject({ kind: 'saturation', state: 'cleared', sampleIndex: 132 });
  });

  it('gives the same outputs and events for any split into blocks (four outputs)', () => {
    const n = 3000;
    const phase = move(n, 30);
    const { channels } = detectorOutputs(FOUR_OUTPUTS, phase, { power: (i) => (i > 1200 && i < 1300 ? 0.1 : 1), noiseRms: 0.002 });
    const four = { ...options, channels: FOUR_OUTPUTS };
    const whole = runChannels(channels, four);
    fc.assert(
      fc.property(fc.uniqueArray(fc.integer({ min: 1, max: n - 1 }), { maxLength: 6 }), (cuts) => {
        const split = runChannels(channels, four, [...cuts].sort((a, b) => a - b));
        expect(split.out).toEqual(whole.out);
        expect(split.events).toEqual(whole.events);
      }),
      { numRuns: 25 },
    );
  });

  it('rejects a wrong number of sample arrays and a two-output layout, naming them', () => {
    const pipeline = createChannelPipeline(options);
    expect(() => pipeline.process([new Float64Array(1), new Float64Array(1)], 1, outputs(1), [])).toThrow('channels must be 3 sample arrays, one per output (got 2)');
    expect(() => createChannelPipeline({ ...options, channels: UNBALANCED_THREE.slice(0, 2) })).toThrow('channels.length must be an integer in 3..4');
  });
});
