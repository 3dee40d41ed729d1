import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  airIndexSensitivities,
  airIndexValidity,
  refractiveIndexOfAir,
  saturationVapourPressurePa,
  type AirIndexEquation,
} from '../../src/core/metrology/index.js';
import { OptionError } from '../../src/core/options.js';

const standard = { pressurePa: 101_325, co2Ppm: 450, vacuumWavelengthM: 633e-9 } as const;

describe('refractiveIndexOfAir: check values', () => {
  // Third-party doc (docs/references.md): a public refractive-index package implementing the NIST equations,
  // λ_vac = 633.0 nm, p = 101325 Pa, CO2 = 450 µmol/mol. Tolerances from docs/references.md: 1e-12 for the modified
  // Edlén (closed-form, both sides evaluate the same arithmetic), 1e-9 for Ciddor (independent implementations
  // differ in the gas constant and the order of the compressibility terms).
  const table: readonly (readonly [number, number, number, number])[] = [
    [20, 20, 1.0002716285340578, 1.0002716291691649],
    [20, 80, 1.0002711183472626, 1.0002711197635226],
    [60, 80, 1.0002340241754055, 1.0002339748542823],
  ];
  it.each(table)('t = %d °C, RH = %d %%', (temperatureC, relativeHumidityPct, ciddor, edlen) => {
    const conditions = { ...standard, temperatureC, relativeHumidityPct };
    const byCiddor = refractiveIndexOfAir({ ...conditions, equation: 'ciddor' });
    const byEdlen = refractiveIndexOfAir({ ...conditions, equation: 'edlen' });
    expect(Math.abs(byCiddor.n - ciddor)).toBeLessThan(1e-9);
    expect(Math.abs(byEdlen.n - edlen)).toBeLessThan(1e-12);
    expect(byCiddor.airWavelengthM).toBe(633e-9 / byCiddor.n);
  });

  it('shop-floor formula: hand-worked value at 20 °C, 101.325 kPa, 50 % RH', () => {
    // Stone & Zimmerman, Appendix B (published via docs/references.md): 1 + 7.86e-4·101.325/293 − 1.5e-11·50·(400 + 160)
    // = 1 + 2.7181 40 6e-4 − 4.2e-7 = 1.000271393823 (worked by hand). Tolerance 1e-12: rounding of the hand sum.
    const result = refractiveIndexOfAir({ ...standard, temperatureC: 20, relativeHumidityPct: 50, equation: 'shopfloor' });
    expect(Math.abs(result.n - 1.000271393823)).toBeLessThan(1e-12);
    expect(result.warnings).toEqual([]);
  });

  it('shop-floor formula stays within about 5e-8 of the modified Edlén over its stated range', () => {
    // Stone & Zimmerman, Appendix B (docs/references.md): within about 5e-8 over 15–25 °C, 95–105 kPa, 0–80 % RH.
    // Tolerance 6e-8: "about"; the worst case found on a grid here is 5.3e-8, at the corner 15 °C, 95 kPa, 80 %.
    fc.assert(
      fc.property(
        fc.double({ min: 15, max: 25, noNaN: true }),
        fc.double({ min: 95_000, max: 105_000, noNaN: true }),
        fc.double({ min: 0, max: 80, noNaN: true }),
        (temperatureC, pressurePa, relativeHumidityPct) => {
          const conditions = { temperatureC, pressurePa, relativeHumidityPct, vacuumWavelengthM: 632.9908e-9 };
          const shop = refractiveIndexOfAir({ ...conditions, equation: 'shopfloor' }).n;
          const edlen = refractiveIndexOfAir({ ...conditions, equation: 'edlen' }).n;
          expect(Math.abs(shop - edlen)).toBeLessThan(6e-8);
        },
      ),
      { numRuns: 300 },
    );
  });
});

describe('refractiveIndexOfAir: sensitivities near 20 °C, 101.325 kPa, 50 % RH', () => {
  // Common practice (docs/references.md, also computed): about −0.96 ppm/K, +0.27 ppm/hPa, −0.0085 ppm per % RH.
  // Tolerances ±0.02 ppm/K, ±0.005 ppm/hPa, ±0.0005 ppm/% cover the rounding of the quoted figures.
  it.each(['ciddor', 'edlen'] as const)('%s', (equation) => {
    const slopes = airIndexSensitivities({
      ...standard,
      temperatureC: 20,
      relativeHumidityPct: 50,
      vacuumWavelengthM: 632.9908e-9,
      equation,
    });
    expect(Math.abs(slopes.perKelvin * 1e6 + 0.96)).toBeLessThan(0.02);
    expect(Math.abs(slopes.perPascal * 100 * 1e6 - 0.27)).toBeLessThan(0.005);
    expect(Math.abs(slopes.perHumidityUnit * 1e6 + 0.0085)).toBeLessThan(0.0005);
    expect(slopes.humidityUnit).toBe('%');
  });

  it('matches a direct difference of the index', () => {
    // A 1 K step of the air temperature moves n by about the slope (the slope is nearly constant over 1 K:
    // curvature about 0.7 % per K, so 2 % tolerance).
    const at = (temperatureC: number): number =>
      refractiveIndexOfAir({ ...standard, temperatureC, relativeHumidityPct: 50 }).n;
    const slope = airIndexSensitivities({ ...standard, temperatureC: 20, relativeHumidityPct: 50 }).perKelvin;
    expect(Math.abs((at(20.5) - at(19.5)) / slope - 1)).toBeLessThan(0.02);
  });

  it('gives a CO2 slope for ciddor and edlen and none for the shop-floor formula', () => {
    // Ciddor 1996, eq. (2) (published): (n − 1) grows by 0.534e-6 per µmol/mol, so about +1.4e-10 per µmol/mol.
    const slope = airIndexSensitivities({ ...standard, temperatureC: 20, relativeHumidityPct: 50 }).perCo2Ppm;
    expect(slope).toBeGreaterThan(1.3e-10);
    expect(slope).toBeLessThan(1.5e-10);
    const shop = airIndexSensitivities({ ...standard, temperatureC: 20, relativeHumidityPct: 50, equation: 'shopfloor' });
    expect(shop.perCo2Ppm).toBe(0);
  });
});

describe('refractiveIndexOfAir: humidity forms and invariants', () => {
  const equations: readonly AirIndexEquation[] = ['ciddor', 'edlen', 'shopfloor'];

  it('gives the same index for relative humidity, dew point and vapour pressure describing the same air', () => {
    fc.assert(
      fc.property(
        fc.constantFrom(...equations),
        fc.double({ min: 16, max: 24, noNaN: true }),
        fc.double({ min: -10, max: 15, noNaN: true }),
        (equation, temperatureC, dewPointC) => {
          const vapourPressurePa = saturationVapourPressurePa(dewPointC);
          const relativeHumidityPct = (100 * vapourPressurePa) / saturationVapourPressurePa(temperatureC);
          const base = { ...standard, vacuumWavelengthM: 632.9908e-9, temperatureC, equation };
          const byDew = refractiveIndexOfAir({ ...base, dewPointC });
          const byVapour = refractiveIndexOfAir({ ...base, vapourPressurePa });
          const byRh = refractiveIndexOfAir({ ...base, relativeHumidityPct });
          expect(Math.abs(byDew.n - byVapour.n)).toBeLessThan(1e-15);
          expect(Math.abs(byDew.n - byRh.n)).toBeLessThan(1e-15);
          expect(byDew.relativeHumidityPct).toBeCloseTo(relativeHumidityPct, 9);
        },
      ),
      { numRuns: 200 },
    );
  });

  it('n falls with temperature and humidity and rises with pressure, within each stated range', () => {
    fc.assert(
      fc.property(
        fc.constantFrom(...equations),
        fc.double({ min: 15, max: 24.9, noNaN: true }),
        fc.double({ min: 95_000, max: 104_000, noNaN: true }),
        fc.double({ min: 0, max: 79, noNaN: true }),
        (equation, temperatureC, pressurePa, relativeHumidityPct) => {
          const base = { temperatureC, pressurePa, relativeHumidityPct, vacuumWavelengthM: 632.9908e-9, equation };
          const n = refractiveIndexOfAir(base).n;
          expect(refractiveIndexOfAir({ ...base, temperatureC: temperatureC + 0.1 }).n).toBeLessThan(n);
          expect(refractiveIndexOfAir({ ...base, pressurePa: pressurePa + 100 }).n).toBeGreaterThan(n);
          expect(refractiveIndexOfAir({ ...base, relativeHumidityPct: relativeHumidityPct + 1 }).n).toBeLessThan(n);
        },
      ),
      { numRuns: 200 },
    );
  });

  it('defaults CO2 to 450 µmol/mol and the equation to Ciddor', () => {
    const implicit = refractiveIndexOfAir({ temperatureC: 20, pressurePa: 101_325, relativeHumidityPct: 50, vacuumWavelengthM: 633e-9 });
    const explicit = refractiveIndexOfAir({ ...standard, temperatureC: 20, relativeHumidityPct: 50, equation: 'ciddor' });
    expect(implicit.n).toBe(explicit.n);
    expect(implicit.equation).toBe('ciddor');
    expect(implicit.co2Ppm).toBe(450);
  });

  it('accepts frost points below 0 °C through the ice equation', () => {
    const result = refractiveIndexOfAir({ ...standard, temperatureC: -5, dewPointC: -10 });
    // Over ice at −10 °C about 259.9 Pa (memory, humidity tables); tolerance 0.5 Pa.
    expect(result.vapourPressurePa).toBeCloseTo(259.9, 0);
    expect(result.warnings).toEqual([]);
  });
});

describe('refractiveIndexOfAir: validity ranges', () => {
  it('warns outside the stated range and still gives the value', () => {
    const result = refractiveIndexOfAir({ ...standard, temperatureC: 60, relativeHumidityPct: 80, equation: 'edlen' });
    expect(result.warnings).toHaveLength(1);
    expect(result.warnings[0]).toMatchObject({ quantity: 'temperatureC', value: 60, min: 0, max: 40, unit: '°C' });
    expect(result.warnings[0]?.message).toMatch(/outside the stated validity range of the modified Edlén/);
  });

  it('holds Ciddor to the ranges stated for his equations: 80–120 kPa, 300–1690 nm', () => {
    // Ranges as a public implementation of Ciddor 1996 states them (refractiveindex.info script, third-party doc).
    const thin = refractiveIndexOfAir({ ...standard, temperatureC: 20, relativeHumidityPct: 50, pressurePa: 70_000, equation: 'ciddor' });
    expect(thin.warnings.map((warning) => warning.quantity)).toEqual(['pressurePa']);
    expect(thin.warnings[0]).toMatchObject({ min: 80_000, max: 120_000 });
    const infrared = refractiveIndexOfAir({ ...standard, temperatureC: 20, relativeHumidityPct: 50, vacuumWavelengthM: 1695e-9, equation: 'ciddor' });
    expect(infrared.warnings.map((warning) => warning.quantity)).toEqual(['vacuumWavelengthM']);
    expect(refractiveIndexOfAir({ ...standard, temperatureC: 20, relativeHumidityPct: 50, vacuumWavelengthM: 1550e-9, pressurePa: 85_000, equation: 'ciddor' }).warnings).toEqual([]);
  });

  it('modified Edlén agrees with Ciddor within 4e-8 over its range', () => {
    // The modified Edlén's range is derived, not stated by its papers (docs/metrology.md): the box where it agrees
    // with Ciddor's independent equations within 4e-8. Every corner and midpoint of the box; worst found 3.7e-8.
    const range = airIndexValidity.edlen;
    const points = (quantity: keyof typeof range): number[] => {
      const { min, max } = range[quantity];
      return [min, (min + max) / 2, max];
    };
    let worst = 0;
    for (const temperatureC of points('temperatureC'))
      for (const pressurePa of points('pressurePa'))
        for (const relativeHumidityPct of points('relativeHumidityPct'))
          for (const co2Ppm of points('co2Ppm'))
            for (const vacuumWavelengthM of points('vacuumWavelengthM')) {
              const conditions = { temperatureC, pressurePa, relativeHumidityPct, co2Ppm, vacuumWavelengthM };
              const edlen = refractiveIndexOfAir({ ...conditions, equation: 'edlen', outOfRange: 'error' }).n;
              const ciddor = refractiveIndexOfAir({ ...conditions, equation: 'ciddor', outOfRange: 'error' }).n;
              worst = Math.max(worst, Math.abs(edlen - ciddor));
            }
    expect(worst).toBeLessThan(4e-8);
    // Just outside the box the two part beyond the bound, which is why it ends there (third-party values above).
    const hot = { ...standard, temperatureC: 60, relativeHumidityPct: 80 };
    const apart = refractiveIndexOfAir({ ...hot, equation: 'edlen' }).n - refractiveIndexOfAir(hot).n;
    expect(Math.abs(apart)).toBeGreaterThan(4e-8);
    expect(refractiveIndexOfAir({ ...standard, temperatureC: 20, relativeHumidityPct: 50, pressurePa: 70_000, equation: 'edlen' }).warnings.map((w) => w.quantity)).toEqual(['pressurePa']);
  });

  it('takes a relative humidity of 100 % as given, at the edge of every range, without a warning', () => {
    for (const temperatureC of [0, 7.3, 20, 40]) {
      const result = refractiveIndexOfAir({ ...standard, temperatureC, relativeHumidityPct: 100, outOfRange: 'error' });
      expect(result.relativeHumidityPct).toBe(100);
    }
  });

  it('warns for each quantity out of range', () => {
    const result = refractiveIndexOfAir({
      temperatureC: 26,
      pressurePa: 90_000,
      relativeHumidityPct: 85,
      co2Ppm: 800,
      vacuumWavelengthM: 633e-9,
      equation: 'shopfloor',
    });
    expect(result.warnings.map((warning) => warning.quantity).sort()).toEqual(
      ['co2Ppm', 'pressurePa', 'relativeHumidityPct', 'temperatureC'].sort(),
    );
  });

  it('Ciddor accepts 60 °C and 1550 nm without warnings, the modified Edlén warns at 1550 nm', () => {
    const infrared = { ...standard, temperatureC: 20, relativeHumidityPct: 50, vacuumWavelengthM: 1550e-9 };
    expect(refractiveIndexOfAir({ ...standard, temperatureC: 60, relativeHumidityPct: 80 }).warnings).toEqual([]);
    expect(refractiveIndexOfAir(infrared).warnings).toEqual([]);
    expect(refractiveIndexOfAir({ ...infrared, equation: 'edlen' }).warnings.map((w) => w.quantity)).toEqual([
      'vacuumWavelengthM',
    ]);
  });

  it('throws instead of warning when outOfRange is "error"', () => {
    const call = (): unknown =>
      refractiveIndexOfAir({ ...standard, temperatureC: 60, relativeHumidityPct: 80, equation: 'edlen', outOfRange: 'error' });
    expect(call).toThrow(OptionError);
    expect(call).toThrow(/temperatureC must be in \[0, 40\] °C, the stated validity range of the modified Edlén.*\(got 60\)/);
  });

  it.each([
    [{ relativeHumidityPct: 101 }, /relativeHumidityPct must be a number in \[0, 100\] \(got 101\)/],
    [{ relativeHumidityPct: -1 }, /relativeHumidityPct/],
    [{ relativeHumidityPct: 50, pressurePa: -5 }, /pressurePa must be a positive finite number \(got -5\)/],
    [{ relativeHumidityPct: 50, temperatureC: Number.NaN }, /temperatureC must be a finite number \(got NaN\)/],
    [{ dewPointC: 25 }, /dewPointC must be at most the air temperature 20 °C/],
    [{ dewPointC: -90 }, /dewPointC must be at least -83.15 °C/],
    [{ relativeHumidityPct: 50, temperatureC: -90 }, /temperatureC must be a number in \[-83\.15, 373\.946\] °C/],
    [{ vapourPressurePa: 5000 }, /vapourPressurePa must be a number in \[0, 2339\.\d+\] \(got 5000\)/],
    [{}, /humidity must be given exactly once.*\(got "none"\)/],
    [{ relativeHumidityPct: 50, dewPointC: 10 }, /humidity must be given exactly once.*relativeHumidityPct and dewPointC/],
    [{ relativeHumidityPct: 50, vacuumWavelengthM: 100e-9 }, /vacuumWavelengthM must be in \[2e-7, 1e-5\] m/],
    [{ relativeHumidityPct: 50, vacuumWavelengthM: 633 }, /vacuumWavelengthM/],
    [{ relativeHumidityPct: 50, co2Ppm: -3 }, /co2Ppm/],
    [{ relativeHumidityPct: 50, equation: 'ideal-gas' }, /equation must be one of "ciddor", "edlen", "shopfloor"/],
    [{ relativeHumidityPct: 50, outOfRange: 'ignore' }, /outOfRange must be one of "warn", "error"/],
    [{ relativeHumidityPct: 50, equation: 'shopfloor', vacuumWavelengthM: 532e-9 }, /only for He-Ne 633 nm/],
    [{ relativeHumidityPct: 100, temperatureC: 95, pressurePa: 50_000 }, /pressurePa must be above the water-vapour partial pressure/],
  ] as const)('rejects impossible input %#', (change, message) => {
    expect(() =>
      refractiveIndexOfAir({ ...standard, temperatureC: 20, ...(change as object) } as Parameters<typeof refractiveIndexOfAir>[0]),
    ).toThrow(message);
  });
});
