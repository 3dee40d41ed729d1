// Normalisation of a measured length to the 20 °C reference temperature of ISO 1, L20 = L_T / (1 + α (T − 20)),
// and a small table of linear expansion coefficients with the source of each value.
import { OptionError, finiteNumber, numberInRange } from '../options.js';

/** Reference temperature for geometrical product specification and verification (ISO 1), °C. */
export const REFERENCE_TEMPERATURE_C = 20;

/** How far a value can be trusted: published source, recalled value, or fact of the trade (docs/metrology.md). */
export type SourceTag = 'published' | 'memory' | 'common practice';

export interface Material {
  /** Key for options and the command line. */
  readonly key: string;
  readonly name: string;
  /** Linear expansion coefficient near 20 °C, 1/K. */
  readonly expansionPerK: number;
  /** Half-width of the spread the source gives around `expansionPerK`, 1/K; 0 when it gives one value. */
  readonly halfRangePerK: number;
  readonly source: string;
  readonly tag: SourceTag;
}

export const materials: readonly Material[] = [
  { key: 'aluminium', name: 'aluminium', expansionPerK: 23.1e-6, halfRangePerK: 0, source: 'Swyt, J. Res. NIST 99(1), 31 (1994)', tag: 'published' },
  { key: 'steel', name: 'steel', expansionPerK: 11.5e-6, halfRangePerK: 0, source: 'Swyt, J. Res. NIST 99(1), 31 (1994)', tag: 'published' },
  { key: 'silicon', name: 'silicon', expansionPerK: 2.6e-6, halfRangePerK: 0, source: 'Swyt, J. Res. NIST 99(1), 31 (1994)', tag: 'published' },
  { key: 'granite', name: 'granite', expansionPerK: 7e-6, halfRangePerK: 1e-6, source: 'range 6e-6 to 8e-6 /K, typical of handbook tables', tag: 'common practice' },
  { key: 'fe-ni36', name: 'Fe-36Ni low-expansion alloy', expansionPerK: 1.2e-6, halfRangePerK: 0, source: 'about 1.2e-6 /K near 20 °C, typical of handbook tables', tag: 'common practice' },
  { key: 'fused-silica', name: 'fused silica', expansionPerK: 0.5e-6, halfRangePerK: 0, source: 'about 0.5e-6 /K, typical of handbook tables', tag: 'common practice' },
  { key: 'glass-ceramic', name: 'low-expansion glass-ceramic', expansionPerK: 0, halfRangePerK: 0.02e-6, source: '0 ± 0.02e-6 /K, the tightest grade commonly offered', tag: 'common practice' },
];

export function materialByKey(key: string): Material {
  const found = materials.find((material) => material.key === key);
  if (found === undefined) {
    throw new OptionError('material', `one of ${materials.map((material) => material.key).join(', ')}`, key);
  }
  return found;
}

export interface ThermalNormalisationOptions {
  /** Length measured at the material temperature, m. */
  readonly lengthM: number;
  /** Temperature of the measured part or scale during the measurement, °C. */
  readonly materialTemperatureC: number;
  /** Linear expansion coefficient of the material, 1/K, in [-1e-4, 1e-4]. */
  readonly expansionPerK: number;
}

/** The length the part would have at 20 °C, m. */
export function lengthAtReferenceTemperatureM(options: ThermalNormalisationOptions): number {
  const lengthM = finiteNumber('lengthM', options.lengthM);
  const temperatureC = finiteNumber('materialTemperatureC', options.materialTemperatureC);
  // Beyond 1e-4 /K no engineering solid applies, so a value there is almost surely a unit mistake (ppm/K given as 1/K).
  const expansionPerK = numberInRange('expansionPerK', options.expansionPerK, -1e-4, 1e-4);
  const growth = 1 + expansionPerK * (temperatureC - REFERENCE_TEMPERATURE_C);
  if (!(growth > 0)) {
    throw new OptionError('materialTemperatureC', 'close enough to 20 °C that 1 + α (T − 20) stays positive', temperatureC);
  }
  return lengthM / growth;
}
