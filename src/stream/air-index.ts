// Operator: air conditions in, refractive index of air out (Ciddor 1996, modified Edlén or shop-floor), for
// the axes' `refractiveIndex$` while the environment changes during a run.
import { map, type OperatorFunction } from 'rxjs';
import { refractiveIndexOfAir, type AirIndexOptions } from '../core/index.js';

/** Each reading of the air gives n; a reading outside the equation's stated validity range errors the stream when `outOfRange: 'error'`. */
export function airIndex(): OperatorFunction<AirIndexOptions, number> {
  return map((air) => refractiveIndexOfAir(air).n);
}
