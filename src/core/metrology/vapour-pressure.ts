// Saturation vapour pressure of water: IAPWS-IF97 region 4 saturation-pressure equation (IAPWS 1997) over liquid
// water, and the IAPWS sublimation-pressure equation (Wagner, Saul & Pruss 1994) over ice below 0 °C, as used by
// Stone & Zimmerman (NIST Engineering Metrology Toolbox) for the refractive index of air.
import { OptionError } from '../options.js';

const KELVIN_OFFSET = 273.15;
/** Triple point of water, K; the sublimation equation is referred to it. */
const TRIPLE_POINT_K = 273.16;
const TRIPLE_POINT_PA = 611.657;

/** IAPWS-IF97 region 4 coefficients n1..n10 (IAPWS-IF97, Table 34). */
const N1 = 0.11670521452767e4;
const N2 = -0.72421316703206e6;
const N3 = -0.17073846940092e2;
const N4 = 0.1202082470247e5;
const N5 = -0.32325550322333e7;
const N6 = 0.1491510861353e2;
const N7 = -0.48232657361591e4;
const N8 = 0.40511340542057e6;
const N9 = -0.23855557567849;
const N10 = 0.65017534844798e3;

/** Sublimation-pressure coefficients (Wagner, Saul & Pruss 1994, as quoted by Stone & Zimmerman). */
const ICE_A1 = -13.928169;
const ICE_A2 = 34.7078238;

/**
 * Temperatures accepted by {@link saturationVapourPressurePa}, °C: from the lower end of the sublimation equation's
 * range (190 K) to the critical point of water (647.096 K), where the saturation line ends.
 */
export const saturationTemperatureRangeC = {
  /** 190 K, written out so messages show the round value. */
  min: -83.15,
  /** 647.096 K. */
  max: 373.946,
} as const;

/**
 * Saturation vapour pressure in Pa at `temperatureC` (ITS-90, °C): over liquid water from 0 °C to the critical point
 * (IAPWS-IF97 region 4), over ice below 0 °C down to -83.15 °C (190 K). Throws outside that range.
 */
export function saturationVapourPressurePa(temperatureC: number): number {
  if (
    typeof temperatureC !== 'number' ||
    !(temperatureC >= saturationTemperatureRangeC.min && temperatureC <= saturationTemperatureRangeC.max)
  ) {
    throw new OptionError(
      'temperatureC',
      `a number in [${saturationTemperatureRangeC.min}, ${saturationTemperatureRangeC.max}] °C for the saturation vapour pressure of water`,
      temperatureC,
    );
  }
  return unvalidatedSaturationVapourPressurePa(temperatureC);
}

/** The same equations without the range check, for derivatives taken by small steps around a validated point. */
export function unvalidatedSaturationVapourPressurePa(temperatureC: number): number {
  const temperatureK = temperatureC + KELVIN_OFFSET;
  if (temperatureC < 0) {
    const theta = temperatureK / TRIPLE_POINT_K;
    const y = ICE_A1 * (1 - Math.pow(theta, -1.5)) + ICE_A2 * (1 - Math.pow(theta, -1.25));
    return TRIPLE_POINT_PA * Math.exp(y);
  }
  const omega = temperatureK + N9 / (temperatureK - N10);
  const a = omega * omega + N1 * omega + N2;
  const b = N3 * omega * omega + N4 * omega + N5;
  const c = N6 * omega * omega + N7 * omega + N8;
  const ratio = (2 * c) / (-b + Math.sqrt(b * b - 4 * a * c));
  // IF97 gives MPa.
  return 1e6 * ratio * ratio * ratio * ratio;
}
