// The environment changing during a run: the refractive index moves the scale of the reading, not the count.
// Check values: position = fringes · λ_vac / (fold · n) (common practice); Ciddor n at 20 °C, 101325 Pa,
// 20 % RH, 450 ppm CO2, 633 nm = 1.0002716285340578 (third-party doc, docs/references.md; tolerance 1e-9).
import { describe, expect, it } from 'vitest';
import { from, lastValueFrom, Subject, toArray } from 'rxjs';
import { TestScheduler } from 'rxjs/testing';
import { refractiveIndexOfAir } from '../../src/core/index.js';
import { airIndex, createAxes } from '../../src/stream/index.js';
import { axisBlocks, axisOptions, HE_NE_M, quadrature, ramp } from './signal.js';

describe('refractive index during a run', () => {
  it('rescales the whole reading from the next block on, through the setter and the Observable input', async () => {
    const phase = ramp(3000, 30); // 30 fringes in 3000 samples
    const { x, y } = quadrature(phase);
    const blocks = axisBlocks(x, y, [1000, 2000, 3000]);
    const index$ = new Subject<number>();
    const source = new Subject<(typeof blocks)[number]>();
    const axes = createAxes(source, { axes: [axisOptions], refractiveIndex$: index$ });
    const updates: number[] = [];
    const subscription = axes.axes[0]!.position$().subscribe((update) => updates.push(update.positionM));
    source.next(blocks[0]!);
    index$.next(1.0003);
    source.next(blocks[1]!);
    axes.setRefractiveIndex(1.0001);
    source.next(blocks[2]!);
    subscription.unsubscribe();
    const fringesAt = (sample: number) => (phase[sample]! - phase[0]!) / (2 * Math.PI);
    expect(updates[0]).toBeCloseTo((fringesAt(999) * HE_NE_M) / 2, 15);
    expect(updates[1]).toBeCloseTo((fringesAt(1999) * HE_NE_M) / (2 * 1.0003), 15);
    expect(updates[2]).toBeCloseTo((fringesAt(2999) * HE_NE_M) / (2 * 1.0001), 15);
    expect(() => axes.setRefractiveIndex(0.5)).toThrow('refractiveIndex must be a number in [1, 1.01] (got 0.5)');
  });

  it('airIndex in marbles: normal flow, source error, empty source, early unsubscribe, and a reading it refuses', () => {
    const scheduler = new TestScheduler((actual, expected) => expect(actual).toEqual(expected));
    const warm = { temperatureC: 25, pressurePa: 101325, relativeHumidityPct: 50, vacuumWavelengthM: 633e-9 };
    const cold = { ...warm, temperatureC: 15 };
    const n = (air: typeof warm) => refractiveIndexOfAir(air).n;
    scheduler.run(({ cold: coldObservable, expectObservable, expectSubscriptions }) => {
      const normal = coldObservable('-a-b-|', { a: warm, b: cold });
      expectObservable(normal.pipe(airIndex())).toBe('-a-b-|', { a: n(warm), b: n(cold) });
      const failing = coldObservable('-a-#', { a: warm }, new Error('sensor gone'));
      expectObservable(failing.pipe(airIndex())).toBe('-a-#', { a: n(warm) }, new Error('sensor gone'));
      expectObservable(coldObservable<typeof warm>('|').pipe(airIndex())).toBe('|');
      const long = coldObservable('-a-b-a-|', { a: warm, b: cold });
      expectObservable(long.pipe(airIndex()), '^--!').toBe('-a-', { a: n(warm) });
      expectSubscriptions(long.subscriptions).toBe('^--!');
      const impossible = coldObservable('-a-b-|', { a: warm, b: { ...warm, pressurePa: -1 } });
      expectObservable(impossible.pipe(airIndex())).toBe('-a-#', { a: n(warm) }, expect.any(Error));
    });
  });

  it('airIndex turns air readings into n (Ciddor)', async () => {
    const air = { temperatureC: 20, pressurePa: 101325, relativeHumidityPct: 20, co2Ppm: 450, vacuumWavelengthM: 633e-9 };
    const values = await lastValueFrom(from([air]).pipe(airIndex(), toArray()));
    expect(Math.abs(values[0]! - 1.0002716285340578)).toBeLessThan(1e-9);
  });
});
