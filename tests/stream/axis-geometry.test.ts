// The axisGeometry operator over the axis builder: three axes whose motions differ give yaw and pitch, and the
// point of interest follows (geometry checked in tests/core/axis-geometry.test.ts); adapter cases in marbles.
import { describe, expect, it } from 'vitest';
import { concat, lastValueFrom, of, toArray } from 'rxjs';
import { TestScheduler } from 'rxjs/testing';
import { axisGeometry, createAxes, type AxesUpdate, type FrameBlock } from '../../src/stream/index.js';
import { axisOptions, frame, METRES_PER_FRINGE, quadrature, ramp } from './signal.js';

const beams = [
  { xM: 0, yM: 0 },
  { xM: 0.1, yM: 0 },
  { xM: 0, yM: 0.1 },
];

const update = (positions: number[], names = ['A', 'B', 'C']): AxesUpdate =>
  ({ axes: positions.map((positionM, k) => ({ name: names[k]!, sampleIndex: 99, positionM })) }) as unknown as AxesUpdate;

describe('axisGeometry', () => {
  it('gives yaw, pitch and the point of interest from three real axes', async () => {
    // Invented motions: 1, 3 and 2 fringes over 3000 samples on beams at (0, 0), (100 mm, 0), (0, 100 mm).
    const fringes = [1, 3, 2];
    const signals = fringes.map((f) => quadrature(ramp(3000, f)));
    const frames: FrameBlock[] = Array.from({ length: 10 }, (_, k) => frame(signals, 300 * k, 300));
    const axes = createAxes(concat(frames), { axes: ['A', 'B', 'C'].map((name) => ({ ...axisOptions, name })) });
    const results = await lastValueFrom(axes.update$().pipe(axisGeometry({ beams, pointOfInterest: { xM: 0.05, yM: 0.05 }, model: 'small-angle' }), toArray()));
    expect(results.length).toBe(10);
    const last = results[results.length - 1]!;
    const [a, b, c] = fringes.map((f) => ((f * 2999) / 3000) * METRES_PER_FRINGE);
    // Small-angle (hand-worked from the convention z_k = d − ψ x_k + θ y_k): ψ = −(b − a)/0.1 m, θ = (c − a)/0.1 m,
    // and the point at (50 mm, 50 mm) reads a + (b − a)/2 + (c − a)/2. int16 samples: 1e-4 fringe (3e-11 m).
    expect(last.yawRad).toBeCloseTo(-(b! - a!) / 0.1, 9);
    expect(last.pitchRad).toBeCloseTo((c! - a!) / 0.1, 9);
    expect(last.pointM).toBeCloseTo(a! + (b! - a!) / 2 + (c! - a!) / 2, 10);
    expect(last.sampleIndex).toBe(2999);
  });

  it('picks the named axes in beam order', async () => {
    const results = await lastValueFrom(
      of(update([5e-6, 1e-6, 3e-6], ['X', 'Y', 'Z'])).pipe(axisGeometry({ beams: beams.slice(0, 2), axes: ['Y', 'X'], model: 'small-angle' }), toArray()),
    );
    // Beam 1 (x = 0) is Y at 1 µm, beam 2 (x = 100 mm) is X at 5 µm: ψ = −4 µm / 100 mm = −4e-5 rad.
    expect(results[0]!.yawRad).toBeCloseTo(-4e-5, 15);
    expect(results[0]!.pitchRad).toBeNaN();
  });

  it('in marbles: normal flow, source error, empty source, early unsubscribe, a missing axis', () => {
    const scheduler = new TestScheduler((actual, expected) => expect(actual).toEqual(expected));
    const still = update([1e-6, 1e-6, 1e-6]);
    // ψ = −atan(slope): −0 for a level plane.
    const solved = { sampleIndex: 99, yawRad: -0, pitchRad: 0, pointM: 1e-6, yawUncertaintyRad: 0, pitchUncertaintyRad: 0, pointUncertaintyM: 0 };
    const operator = axisGeometry({ beams });
    scheduler.run(({ cold, expectObservable, expectSubscriptions }) => {
      expectObservable(cold('-a-a-|', { a: still }).pipe(operator)).toBe('-s-s-|', { s: solved });
      expectObservable(cold('-a-#', { a: still }, new Error('link down')).pipe(operator)).toBe('-s-#', { s: solved }, new Error('link down'));
      expectObservable(cold<AxesUpdate>('---|').pipe(operator)).toBe('---|');
      const long = cold('-a-a-a-a-|', { a: still });
      expectObservable(long.pipe(operator), '^--!').toBe('-s--', { s: solved });
      expectSubscriptions(long.subscriptions).toBe('^--!');
      expectObservable(cold('-a-|', { a: update([1e-6, 2e-6]) }).pipe(operator)).toBe('-#', undefined, new Error('axisGeometry: 3 axes needed (A, B); the updates carry A, B'));
    });
    expect(() => axisGeometry({ beams, axes: ['A'] })).toThrow(/axes must be one axis name per beam \(3\)/);
  });
});
