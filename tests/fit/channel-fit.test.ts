// Checks of the three- and four-output fit and the channel combiner on simulated detectors with drifting source
// power (tests/support/detector-outputs.ts; invented layouts). Check sources: the symmetric three-phase formula
// φ = atan2(√3·(I2 − I3), 2·I1 − I2 − I3) for outputs 120° apart (common practice in 3×3-coupler demodulation;
// Brown et al., Proc. SPIE 1584 (1991), memory), derived in the test below; ml-matrix (third-party doc) for the
// least-squares solution of M·z = I and for the least-variance combination C⁻¹m/(mᵀC⁻¹m), built from the stored
// samples rather than from moment sums; the true phase of the simulation.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { Matrix, solve } from 'ml-matrix';
import {
  channelParametersOf,
  channelsOfEllipse,
  createChannelCombiner,
  createChannelMomentAccumulator,
  createCorrection,
  createEllipseAccumulator,
  demodulationMatrix,
  ellipseOfChannels,
  normaliseChannels,
  OptionError,
  validateChannelParameters,
  wrapPhase,
  type ChannelParameters,
} from '../../src/core/index.js';
import { detectorOutputs, FOUR_OUTPUTS, SYMMETRIC_THREE, UNBALANCED_THREE, wanderingPhase } from '../support/detector-outputs.js';

/** Slow source-power drift: +4 % over the record plus a 2 % wobble (invented, of the size the real recordings show). */
const drift = (n: number) => (i: number) => 1 + 0.04 * (i / n) + 0.02 * Math.sin((2 * Math.PI * 1.3 * i) / n);

/** The whole fit as calibrate does it: power normalisation, then the ellipse of the normalised pair. */
function fitLayout(channels: Float64Array[]): ChannelParameters[] {
  const n = channels[0]!.length;
  const moments = createChannelMomentAccumulator({ channelCount: channels.length });
  moments.add(channels, n);
  const result = moments.solve();
  if (!result.ok) throw new Error(result.message);
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  const power = new Float64Array(n);
  normaliseChannels(result.normalisation, channels, n, x, y, power);
  const ellipse = createEllipseAccumulator();
  ellipse.add(x, y, n);
  const fit = ellipse.solve();
  if (!fit.ok) throw new Error(fit.message);
  return channelParametersOf(result.normalisation, fit.calibration);
}

function combine(layout: readonly ChannelParameters[], channels: Float64Array[]) {
  const n = channels[0]!.length;
  const u = new Float64Array(n);
  const v = new Float64Array(n);
  const power = new Float32Array(n);
  createChannelCombiner({ channels: layout, adc: { kind: 'float', fullScale: 1e9 } }).process(channels, n, u, v, power, new Uint8Array(n), 0, []);
  return { u, v, power, phase: Float64Array.from(u, (ui, i) => Math.atan2(v[i]!, ui)) };
}

/** Largest |wrapped difference| between two phase series after removing their mean difference. */
function phaseDisagreement(a: ArrayLike<number>, b: ArrayLike<number>): number {
  const n = a.length;
  let sin = 0;
  let cos = 0;
  for (let i = 0; i < n; i++) {
    sin += Math.sin(a[i]! - b[i]!);
    cos += Math.cos(a[i]! - b[i]!);
  }
  const mean = Math.atan2(sin, cos);
  let worst = 0;
  for (let i = 0; i < n; i++) worst = Math.max(worst, Math.abs(wrapPhase(a[i]! - b[i]! - mean)));
  return worst;
}

describe('three- and four-output fit', () => {
  const n = 20_000;
  const phase = wanderingPhase(n, 30);

  for (const [name, layout] of [['unbalanced three', UNBALANCED_THREE], ['four outputs', FOUR_OUTPUTS]] as const) {
    it(`recovers every output's offset, gain and phase of ${name} under a drifting source`, () => {
      const { channels, power } = detectorOutputs(layout, phase, { power: drift(n), noiseRms: 1e-4 });
      const meanPower = power.reduce((sum, p) => sum + p, 0) / n;
      const fitted = fitLayout(channels);
      // Offsets and gains come out at the mean power (P is normalised to 1 over the fit); phases relative to channel 1.
      // Tolerance 3e-3: the drift over 30 fringes is not perfectly uncorrelated with the phase (see channel-fit.ts).
      fitted.forEach((channel, k) => {
        expect(channel.offset / (layout[k]!.offset * meanPower)).toBeCloseTo(1, 2);
        expect(channel.amplitude / (layout[k]!.amplitude * meanPower)).toBeCloseTo(1, 2);
        expect(Math.abs(wrapPhase(channel.phaseRad - layout[k]!.phaseRad))).toBeLessThan(3e-3);
      });
    });

    it(`its phase follows the true phase of ${name} far better than any pair does`, () => {
      const { channels } = detectorOutputs(layout, phase, { power: drift(n), noiseRms: 1e-4 });
      const combined = combine(fitLayout(channels), channels);
      const threeChannelError = phaseDisagreement(combined.phase, phase);
      let bestPair = Infinity;
      for (let a = 0; a < channels.length; a++) {
        for (let b = a + 1; b < channels.length; b++) {
          const accumulator = createEllipseAccumulator({ maxPhaseErrorRad: 1.55, minCoverage: 0 });
          accumulator.add(channels[a]!, channels[b]!, n);
          const fit = accumulator.solve();
          if (!fit.ok) continue; // a pair in (anti)phase has no ellipse
          const u = new Float64Array(n);
          const v = new Float64Array(n);
          createCorrection({ calibration: fit.calibration }).process(channels[a]!, channels[b]!, u, v, n);
          const pairPhase = Float64Array.from(u, (ui, i) => Math.atan2(v[i]!, ui));
          // A pair may run the other way round: compare with whichever sense fits.
          bestPair = Math.min(bestPair, phaseDisagreement(pairPhase, phase), phaseDisagreement(pairPhase.map((p) => -p), phase));
        }
      }
      expect(threeChannelError).toBeLessThan(5e-3);
      expect(bestPair / threeChannelError).toBeGreaterThan(10);
    });
  }

  it('gives the symmetric three-phase formula on a balanced 120° head, whatever the power', () => {
    // I_k = P(o + a·cos(φ − 2πk/3)), k = 0, 1, 2: 2I1 − I2 − I3 = 3Pa·cos φ and √3(I2 − I3) = 3Pa·sin φ, since
    // cos(φ − 120°) + cos(φ − 240°) = −cos φ and cos(φ − 120°) − cos(φ − 240°) = √3·sin φ. P and o cancel.
    const formulaOf = ([i1, i2, i3]: Float64Array[]) => Float64Array.from(i1!, (_, i) => Math.atan2(Math.sqrt(3) * (i2![i]! - i3![i]!), 2 * i1![i]! - i2![i]! - i3![i]!));
    const drifting = detectorOutputs(SYMMETRIC_THREE, phase, { power: drift(n) }).channels;
    expect(phaseDisagreement(combine(fitLayout(drifting), drifting).phase, formulaOf(drifting))).toBeLessThan(1e-3);
    // With the layout itself (no fit), the combiner is the formula to rounding, even under a 30 % power swing.
    const swinging = detectorOutputs(SYMMETRIC_THREE, phase, { power: (i) => 1 + 0.3 * Math.sin((2 * Math.PI * 2.7 * i) / n) }).channels;
    expect(phaseDisagreement(combine(SYMMETRIC_THREE, swinging).phase, formulaOf(swinging))).toBeLessThan(1e-12);
  });

  it('solves (P, P·cos φ, P·sin φ) per sample as ml-matrix least squares does', () => {
    const m = 200;
    const { channels } = detectorOutputs(FOUR_OUTPUTS, wanderingPhase(m, 2), { power: (i) => 0.8 + i / m, noiseRms: 0.01, seed: 5 });
    const combined = combine(FOUR_OUTPUTS, channels);
    const model = new Matrix(FOUR_OUTPUTS.map((c) => [c.offset, c.amplitude * Math.cos(c.phaseRad), c.amplitude * Math.sin(c.phaseRad)]));
    for (let i = 0; i < m; i += 17) {
      const z = solve(model, Matrix.columnVector(channels.map((channel) => channel[i]!)));
      expect(combined.power[i]).toBeCloseTo(z.get(0, 0), 6); // float32 power
      expect(combined.u[i]).toBeCloseTo(z.get(1, 0) / z.get(0, 0), 10);
      expect(combined.v[i]).toBeCloseTo(z.get(2, 0) / z.get(0, 0), 10);
    }
  });

  it('estimates the power as the least-variance combination with mean 1, as ml-matrix computes it from the samples', () => {
    const m = 3000;
    const { channels } = detectorOutputs(UNBALANCED_THREE, wanderingPhase(m, 5), { power: drift(m), noiseRms: 0.003, seed: 9 });
    const moments = createChannelMomentAccumulator({ channelCount: 3 });
    moments.add(channels, m);
    const result = moments.solve();
    if (!result.ok) throw new Error(result.message);
    const data = new Matrix(Array.from({ length: m }, (_, i) => channels.map((channel) => channel[i]!)));
    const mean = data.mean('column');
    const centred = data.clone().subRowVector(mean);
    const covariance = centred.transpose().mmul(centred).div(m);
    const direction = solve(covariance, Matrix.columnVector(mean));
    const norm = Matrix.rowVector(mean).mmul(direction).get(0, 0);
    for (let k = 0; k < 3; k++) expect(result.normalisation.weights[k]! / (direction.get(k, 0) / norm)).toBeCloseTo(1, 9);
  });

  it('merging accumulators equals accumulating everything in one', () => {
    const { channels } = detectorOutputs(UNBALANCED_THREE, wanderingPhase(2000, 4), { power: drift(2000), noiseRms: 0.001 });
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 1999 }), (cut) => {
        const whole = createChannelMomentAccumulator({ channelCount: 3 });
        whole.add(channels, 2000);
        const head = createChannelMomentAccumulator({ channelCount: 3 });
        head.add(channels, cut);
        const tail = createChannelMomentAccumulator({ channelCount: 3 });
        tail.add(channels.map((channel) => channel.subarray(cut)), 2000 - cut);
        head.merge(tail);
        const a = whole.solve();
        const b = head.solve();
        if (!a.ok || !b.ok) throw new Error('fit failed');
        for (let k = 0; k < 3; k++) expect(b.normalisation.weights[k]! / a.normalisation.weights[k]!).toBeCloseTo(1, 9);
        expect(b.samples).toBe(2000);
      }),
      { numRuns: 20 },
    );
  });

  it('refuses AC-coupled outputs, a repeated output and too few samples, naming the cause', () => {
    const ac = UNBALANCED_THREE.map((c) => ({ ...c, offset: 0 }));
    const moments = createChannelMomentAccumulator({ channelCount: 3 });
    moments.add(detectorOutputs(ac, phase, { noiseRms: 1e-3 }).channels, n);
    expect(moments.solve()).toMatchObject({ ok: false, reason: 'not-dc-coupled' });
    const { channels } = detectorOutputs(UNBALANCED_THREE, phase);
    const repeated = createChannelMomentAccumulator({ channelCount: 3 });
    repeated.add([channels[0]!, channels[1]!, channels[1]!], n);
    expect(repeated.solve()).toMatchObject({ ok: false, reason: 'degenerate' });
    const few = createChannelMomentAccumulator({ channelCount: 3 });
    few.add(channels, 10);
    expect(few.solve()).toMatchObject({ ok: false, reason: 'too-few-samples', message: 'too few samples: 10 < 32' });
    const bad = createChannelMomentAccumulator({ channelCount: 3 });
    bad.add([Float64Array.of(1, NaN, 2), Float64Array.of(1, 1, 1), Float64Array.of(1, 1, 1)], 3);
    expect(bad.skippedNonFinite).toBe(1);
    expect(() => createChannelMomentAccumulator({ channelCount: 5 })).toThrow('channelCount must be an integer in 3..4 (got 5)');
  });
});

describe('channel layouts', () => {
  it('maps a two-channel ellipse onto two outputs and back', () => {
    const ellipse = { offsetX: 0.1, offsetY: -0.2, amplitudeX: 1.2, amplitudeY: 0.9, phaseErrorRad: -0.4 };
    const channels = channelsOfEllipse(ellipse);
    // y = aY·sin(φ + e) = aY·cos(φ − (π/2 − e)).
    expect(channels[1]!.phaseRad).toBeCloseTo(Math.PI / 2 + 0.4, 14);
    const back = ellipseOfChannels(channels);
    for (const key of Object.keys(ellipse) as (keyof typeof ellipse)[]) expect(back[key]).toBeCloseTo(ellipse[key], 14);
  });

  it('rejects layouts that cannot be solved, naming the field', () => {
    expect(() => validateChannelParameters([{ offset: 1, amplitude: 1, phaseRad: 0 }])).toThrow('channels.length must be an integer in 2..4 (got 1)');
    expect(() => validateChannelParameters([...SYMMETRIC_THREE.slice(0, 2), { offset: 1, amplitude: -1, phaseRad: 0 }])).toThrow(
      'channels[2].amplitude must be a positive finite number (got -1)',
    );
    expect(() => validateChannelParameters(SYMMETRIC_THREE.map((c) => ({ ...c, phaseRad: 0.3 })))).toThrow(OptionError);
    expect(() => validateChannelParameters([SYMMETRIC_THREE[0]!, { offset: 1, amplitude: 1, phaseRad: Math.PI }])).toThrow(
      'channels[1].phaseRad must be a phase in (0, π) after channel 1',
    );
    expect(demodulationMatrix(SYMMETRIC_THREE, new Float64Array(9))).not.toBe(false);
  });
});
