import { describe, expect, it } from 'vitest';
import { saturationVapourPressurePa } from '../../src/core/metrology/index.js';

const CELSIUS_OFFSET = 273.15;

describe('saturationVapourPressurePa (IAPWS-IF97 region 4, IAPWS sublimation below 0 °C)', () => {
  // IAPWS-IF97, Table 35 (computer-program verification of the saturation-pressure equation), values in MPa given to
  // 9 significant digits (memory: recalled, and they agree here to all 9 digits). Tolerance 5e-9 relative: the table's
  // rounding.
  it.each([
    [300, 0.353658941e-2],
    [500, 0.263889776e1],
    [600, 0.123443146e2],
  ])('matches the IF97 verification value at %d K', (temperatureK, pressureMPa) => {
    const pressurePa = saturationVapourPressurePa(temperatureK - CELSIUS_OFFSET);
    expect(Math.abs(pressurePa / (pressureMPa * 1e6) - 1)).toBeLessThan(5e-9);
  });

  it('gives 611.657 Pa at the triple point', () => {
    // Triple-point pressure 611.657 Pa (Wexler, J. Res. NBS 80A, 775 (1976), after Guildner, Johnson & Jones;
    // published). IF97 meets it within its own fit; tolerance 0.005 Pa (memory: IF97 deviates from the IAPWS-95
    // reference by well under 0.01 % there).
    expect(Math.abs(saturationVapourPressurePa(0.01) - 611.657)).toBeLessThan(0.005);
  });

  it('over ice below 0 °C is lower than the extrapolated liquid branch would be, and is continuous at 0 °C', () => {
    // Common practice: over ice the saturation pressure is below that over supercooled water; both are about
    // 611.2 Pa at 0 °C (611.15 over ice, 611.21 over water, memory), so the jump at 0 °C is under 0.02 %.
    const iceSide = saturationVapourPressurePa(-1e-9);
    const waterSide = saturationVapourPressurePa(0);
    expect(Math.abs(iceSide / waterSide - 1)).toBeLessThan(2e-4);
    // Frost point −10 °C: 259.9 Pa over ice (memory, common humidity tables), tolerance 0.5 Pa.
    expect(saturationVapourPressurePa(-10)).toBeCloseTo(259.9, 0);
  });

  it('gives the normal boiling point near 100 °C', () => {
    // IF97: ps(373.15 K) = 0.101418 MPa (memory); the normal boiling point 101325 Pa lies at 99.974 °C on ITS-90
    // (published, ITS-90 supplementary information). Tolerance 5 Pa.
    expect(Math.abs(saturationVapourPressurePa(100) - 101_418)).toBeLessThan(5);
    expect(Math.abs(saturationVapourPressurePa(99.974) - 101_325)).toBeLessThan(5);
  });

  it('rejects temperatures outside the equations, naming the option', () => {
    expect(() => saturationVapourPressurePa(-90)).toThrow(/temperatureC must be a number in \[-83\.15, 373\.946\]/);
    expect(() => saturationVapourPressurePa(400)).toThrow(/temperatureC/);
    expect(() => saturationVapourPressurePa(Number.NaN)).toThrow(/got NaN/);
  });
});
