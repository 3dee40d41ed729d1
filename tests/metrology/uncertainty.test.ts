import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  correctLength,
  readingUncertaintyBudget,
  refractiveIndexOfAir,
  type ReadingUncertaintyOptions,
} from '../../src/core/metrology/index.js';

// An invented scenario: a 500 mm move measured on a steel part near 20 °C with a stabilised 633 nm laser.
const air = {
  equation: 'edlen',
  temperatureC: 20,
  pressurePa: 101_325,
  relativeHumidityPct: 50,
  co2Ppm: 450,
  vacuumWavelengthM: 632.9908e-9,
} as const;

const example: ReadingUncertaintyOptions = {
  lengthM: 0.5,
  air,
  wavelengthRelativeUncertainty: 2e-8,
  indexEquationUncertainty: 1e-8,
  airTemperatureUncertaintyK: 0.1,
  pressureUncertaintyPa: 10,
  humidityUncertainty: 2,
  periodicResidualAmplitudeM: 1e-9,
  material: { expansionPerK: 11.5e-6, expansionUncertaintyPerK: 1e-6, temperatureC: 20.2, temperatureUncertaintyK: 0.05 },
  deadPath: { deadPathM: 0.1, deadPathUncertaintyM: 1e-3, indexChangeSinceDatum: 1e-6, indexChangeUncertainty: 1e-7 },
};

function row(name: string): number {
  const found = readingUncertaintyBudget(example).contributions.find((contribution) => contribution.name === name);
  if (found === undefined) throw new Error(`no row ${name}`);
  return found.contributionM;
}

describe('readingUncertaintyBudget: hand-worked GUM example', () => {
  // Hand-worked with the GUM law of propagation (JCGM 100:2008, eq. (10), published), model
  // y = L (λ/λ0) (n0/n) / (1 + α θ) − D Δn / n + e_periodic, θ = T_m − 20 °C. With L = 0.5 m, α θ = 2.3e-6:
  //   vacuum wavelength     L·u_r             = 0.5 × 2e-8                     = 10.0 nm
  //   index equation        L/n·u(n)          = 0.5 × 1e-8                     =  5.0 nm
  //   air temperature       L·0.96e-6·0.1 K   (common-practice slope)          = 48 nm
  //   air pressure          L·0.27e-8·10 Pa   (common-practice slope)          = 13.5 nm
  //   relative humidity     L·0.0085e-6·2 %   (common-practice slope)          =  8.5 nm
  //   expansion coefficient L·θ·u(α)          = 0.5 × 0.2 × 1e-6               = 100 nm
  //   material temperature  L·α·u(T)          = 0.5 × 11.5e-6 × 0.05           = 287.5 nm
  //   α × T (second order)  L·u(α)·u(T)       = 0.5 × 1e-6 × 0.05 (GUM 5.1.2)  = 25 nm
  //   dead path length      Δn·u(D)           = 1e-6 × 1e-3                    =  1.0 nm
  //   index change          D·u(Δn)           = 0.1 × 1e-7                     = 10 nm
  //   periodic residual     a/√2              = 1 nm / √2                      =  0.707 nm
  // Σ u² = 96 066 nm², u_c = 309.9 nm, U (k = 2) = 619.9 nm.
  // Tolerances: 1e-6 relative for rows exact by hand (they differ from the hand figures only by n and 1 + αθ);
  // 1.5 % for the three air-sensor rows, whose hand slopes are the rounded common-practice figures.
  it('gives each contribution', () => {
    const close = (actual: number, expected: number, relative: number): void => {
      expect(Math.abs(actual / expected - 1)).toBeLessThan(relative);
    };
    close(row('vacuum wavelength'), 10.0e-9, 1e-5);
    close(row('index equation'), 5.0e-9, 3e-4);
    close(row('air temperature'), 48e-9, 0.015);
    close(row('air pressure'), 13.5e-9, 0.015);
    close(row('relative humidity'), 8.5e-9, 0.015);
    close(row('expansion coefficient'), 100e-9, 1e-5);
    close(row('material temperature'), 287.5e-9, 1e-5);
    close(row('expansion coefficient × material temperature (second order)'), 25e-9, 1e-5);
    close(row('dead path length'), 1.0e-9, 3e-4);
    close(row('index change since datum'), 10e-9, 3e-4);
    close(row('periodic error residual'), 0.70710678e-9, 1e-8);
  });

  it('gives the combined and expanded uncertainty and the corrected length', () => {
    const budget = readingUncertaintyBudget(example);
    expect(Math.abs(budget.combinedStandardUncertaintyM / 309.9e-9 - 1)).toBeLessThan(0.002);
    expect(budget.coverageFactor).toBe(2);
    expect(budget.expandedUncertaintyM).toBe(2 * budget.combinedStandardUncertaintyM);
    // Hand-worked: 0.5 / 1.0000023 = 0.5 − 1.15e-6 + 2.645e-12 = 0.499 998 850 002 645 m; dead path
    // −0.1 × 1e-6 / 1.00027 = −9.9973e-8 m; sum 0.499 998 750 029 6 m. Tolerance 1e-12 m (the hand rounding).
    expect(Math.abs(budget.correctedLengthM - 0.4999987500296)).toBeLessThan(1e-12);
    expect(budget.warnings).toEqual([]);
  });

  it('states units and sensitivity coefficients with each row', () => {
    const budget = readingUncertaintyBudget(example);
    const byName = new Map(budget.contributions.map((contribution) => [contribution.name, contribution]));
    expect(byName.get('air temperature')).toMatchObject({ standardUncertainty: 0.1, unit: 'K', sensitivityUnit: 'm/K' });
    expect(byName.get('air pressure')).toMatchObject({ standardUncertainty: 10, unit: 'Pa', sensitivityUnit: 'm/Pa' });
    expect(byName.get('vacuum wavelength')?.unit).toBe('m');
    expect(byName.get('expansion coefficient')?.unit).toBe('1/K');
    // The signs carry the physics: a warmer air lowers n, so the reading grows (positive); a warmer part shrinks L20.
    expect(byName.get('air temperature')?.sensitivity).toBeGreaterThan(0);
    expect(byName.get('material temperature')?.sensitivity).toBeLessThan(0);
    for (const contribution of budget.contributions) {
      expect(contribution.contributionM).toBeCloseTo(Math.abs(contribution.sensitivity) * contribution.standardUncertainty, 20);
    }
  });
});

describe('readingUncertaintyBudget: against a Monte Carlo propagation', () => {
  // GUM Supplement 1 (JCGM 101:2008, published method): propagate the distributions through the model itself and
  // compare the standard deviation of y with u_c. 20 000 draws give the standard deviation to about 0.5 %
  // (1/√(2N)); tolerance 3 %. Seeded generator: the same draws every run.
  it('agrees with the spread of the model output', () => {
    const random = mulberry32(20240611);
    const gauss = (): number => Math.sqrt(-2 * Math.log(1 - random())) * Math.cos(2 * Math.PI * random());
    const material = example.material!;
    const deadPath = example.deadPath!;
    const n0 = refractiveIndexOfAir(air).n;
    const draws = 20_000;
    let sum = 0;
    let sumOfSquares = 0;
    for (let i = 0; i < draws; i += 1) {
      const n =
        refractiveIndexOfAir({
          ...air,
          temperatureC: air.temperatureC + 0.1 * gauss(),
          pressurePa: air.pressurePa + 10 * gauss(),
          relativeHumidityPct: air.relativeHumidityPct + 2 * gauss(),
        }).n +
        1e-8 * gauss();
      const wavelengthRatio = 1 + 2e-8 * gauss();
      const corrected = correctLength({
        lengthM: (example.lengthM * wavelengthRatio * n0) / n,
        indexNow: n,
        material: {
          expansionPerK: material.expansionPerK + 1e-6 * gauss(),
          temperatureC: material.temperatureC + 0.05 * gauss(),
        },
        deadPath: {
          deadPathM: deadPath.deadPathM + 1e-3 * gauss(),
          indexChangeSinceDatum: deadPath.indexChangeSinceDatum + 1e-7 * gauss(),
        },
      }).correctedLengthM;
      const y = corrected + 1e-9 * Math.sin(2 * Math.PI * random());
      sum += y;
      sumOfSquares += y * y;
    }
    const mean = sum / draws;
    const spread = Math.sqrt((sumOfSquares - draws * mean * mean) / (draws - 1));
    const budget = readingUncertaintyBudget(example);
    expect(Math.abs(spread / budget.combinedStandardUncertaintyM - 1)).toBeLessThan(0.03);
  });
});

describe('readingUncertaintyBudget: structure and input checks', () => {
  const minimal: ReadingUncertaintyOptions = {
    lengthM: 0.3,
    air: { temperatureC: 21, pressurePa: 100_000, dewPointC: 8, vacuumWavelengthM: 632.9908e-9 },
    wavelengthRelativeUncertainty: 1.5e-6,
    indexEquationUncertainty: 2e-8,
    airTemperatureUncertaintyK: 0.2,
    pressureUncertaintyPa: 20,
    humidityUncertainty: 0.5,
    periodicResidualAmplitudeM: 0,
  };

  it('lists only the rows that apply, and names the humidity row after the quantity given', () => {
    const names = readingUncertaintyBudget(minimal).contributions.map((contribution) => contribution.name);
    expect(names).toEqual(['vacuum wavelength', 'index equation', 'air temperature', 'air pressure', 'dew point', 'periodic error residual']);
    const withCo2 = readingUncertaintyBudget({ ...minimal, co2UncertaintyPpm: 50 });
    expect(withCo2.contributions.map((contribution) => contribution.name)).toContain('CO2 mole fraction');
    expect(readingUncertaintyBudget(minimal).contributions[4]?.unit).toBe('K');
  });

  it('combines the rows as a root sum of squares and scales with the length', () => {
    fc.assert(
      fc.property(fc.double({ min: 1e-3, max: 3, noNaN: true }), fc.double({ min: 0, max: 1e-6, noNaN: true }), (lengthM, uT) => {
        const budget = readingUncertaintyBudget({ ...minimal, lengthM, airTemperatureUncertaintyK: uT });
        const rss = Math.sqrt(budget.contributions.reduce((total, c) => total + c.contributionM * c.contributionM, 0));
        expect(budget.combinedStandardUncertaintyM).toBeCloseTo(rss, 20);
        const doubled = readingUncertaintyBudget({ ...minimal, lengthM: 2 * lengthM, airTemperatureUncertaintyK: uT });
        // Without periodic error and dead path every row is proportional to L.
        expect(doubled.combinedStandardUncertaintyM / budget.combinedStandardUncertaintyM).toBeCloseTo(2, 10);
      }),
      { numRuns: 50 },
    );
  });

  it('passes the equation warnings on', () => {
    const budget = readingUncertaintyBudget({ ...minimal, air: { ...minimal.air, temperatureC: 30, equation: 'shopfloor' } });
    expect(budget.warnings.map((warning) => warning.quantity)).toContain('temperatureC');
  });

  it('rejects negative or non-finite uncertainties, naming the option', () => {
    expect(() => readingUncertaintyBudget({ ...minimal, pressureUncertaintyPa: -1 })).toThrow(
      /pressureUncertaintyPa must be a standard uncertainty ≥ 0 \(got -1\)/,
    );
    expect(() => readingUncertaintyBudget({ ...minimal, humidityUncertainty: Number.NaN })).toThrow(/humidityUncertainty/);
    expect(() => readingUncertaintyBudget({ ...minimal, coverageFactor: 0 })).toThrow(/coverageFactor/);
    expect(() =>
      readingUncertaintyBudget({
        ...minimal,
        deadPath: { deadPathM: -1, deadPathUncertaintyM: 0, indexChangeSinceDatum: 0, indexChangeUncertainty: 0 },
      }),
    ).toThrow(/deadPath.deadPathM/);
    expect(() =>
      readingUncertaintyBudget({
        ...minimal,
        material: { expansionPerK: 11.5, expansionUncertaintyPerK: 0, temperatureC: 20, temperatureUncertaintyK: 0 },
      }),
    ).toThrow(/material.expansionPerK must be a number in \[-0.0001, 0.0001\] \(got 11.5\)/);
  });
});

/** A small seeded generator (mulberry32, public domain) so the Monte Carlo draws repeat exactly. */
function mulberry32(seed: number): () => number {
  let state = seed >>> 0;
  return () => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}
