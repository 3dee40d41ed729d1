import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  REFERENCE_TEMPERATURE_C,
  lengthAtReferenceTemperatureM,
  materialByKey,
  materials,
} from '../../src/core/metrology/index.js';

describe('lengthAtReferenceTemperatureM (ISO 1, 20 °C)', () => {
  it('normalises a steel part measured warm: hand-worked example', () => {
    // Hand-worked: 500 mm of steel (α = 11.5e-6 /K, Swyt 1994, published) measured at 23 °C.
    // α ΔT = 34.5e-6; L20 = 0.5 / 1.0000345 = 0.5 (1 − 34.5e-6 + 1.19025e-9 − ...) = 0.499 982 750 595 m.
    // Tolerance 1e-12 m: the hand value is rounded to 1e-12 m.
    const l20 = lengthAtReferenceTemperatureM({ lengthM: 0.5, materialTemperatureC: 23, expansionPerK: materialByKey('steel').expansionPerK });
    expect(Math.abs(l20 - 0.499982750595)).toBeLessThan(1e-12);
    // The rule of thumb: about 11.5 µm per metre per kelvin for steel (common practice).
    expect((0.5 - l20) / 0.5 / 3).toBeCloseTo(11.5e-6, 8);
  });

  it('normalises an aluminium part measured cool: hand-worked example', () => {
    // Hand-worked: 1 m of aluminium (α = 23.1e-6 /K, Swyt 1994, published) measured at 18 °C.
    // α ΔT = −46.2e-6; L20 = 1 / (1 − 46.2e-6) = 1 + 46.2e-6 + 2.13444e-9 + 9.9e-14 = 1.000 046 202 134 5 m.
    const l20 = lengthAtReferenceTemperatureM({ lengthM: 1, materialTemperatureC: 18, expansionPerK: 23.1e-6 });
    expect(Math.abs(l20 - 1.0000462021345)).toBeLessThan(1e-13);
  });

  it('is the identity at 20 °C and inverts the expansion L_T = L20 (1 + α (T − 20))', () => {
    fc.assert(
      fc.property(
        fc.double({ min: -2, max: 2, noNaN: true }),
        fc.double({ min: 0, max: 40, noNaN: true }),
        fc.double({ min: -1e-5, max: 3e-5, noNaN: true }),
        (lengthM, materialTemperatureC, expansionPerK) => {
          expect(lengthAtReferenceTemperatureM({ lengthM, materialTemperatureC: REFERENCE_TEMPERATURE_C, expansionPerK })).toBe(lengthM);
          const l20 = lengthAtReferenceTemperatureM({ lengthM, materialTemperatureC, expansionPerK });
          expect(l20 * (1 + expansionPerK * (materialTemperatureC - 20))).toBeCloseTo(lengthM, 14);
        },
      ),
    );
  });

  it('rejects a coefficient given in ppm/K instead of 1/K, and non-finite input', () => {
    expect(() => lengthAtReferenceTemperatureM({ lengthM: 1, materialTemperatureC: 21, expansionPerK: 11.5 })).toThrow(
      /expansionPerK must be a number in \[-0\.0001, 0\.0001\] \(got 11\.5\)/,
    );
    expect(() => lengthAtReferenceTemperatureM({ lengthM: Number.NaN, materialTemperatureC: 21, expansionPerK: 1e-6 })).toThrow(/lengthM/);
    expect(() => lengthAtReferenceTemperatureM({ lengthM: 1, materialTemperatureC: Infinity, expansionPerK: 1e-6 })).toThrow(
      /materialTemperatureC/,
    );
  });
});

describe('materials table', () => {
  it('holds the published Swyt (1994) values and tags every entry with its source', () => {
    // D. A. Swyt, J. Res. NIST 99(1), 31 (1994) (published, docs/references.md): aluminium 23.1, steel 11.5, silicon 2.6 ×1e-6 /K.
    expect(materialByKey('aluminium').expansionPerK).toBe(23.1e-6);
    expect(materialByKey('steel').expansionPerK).toBe(11.5e-6);
    expect(materialByKey('silicon').expansionPerK).toBe(2.6e-6);
    for (const material of materials) {
      expect(material.source.length).toBeGreaterThan(0);
      expect(['published', 'memory', 'common practice']).toContain(material.tag);
      expect(Math.abs(material.expansionPerK)).toBeLessThan(1e-4);
    }
    expect(materialByKey('granite')).toMatchObject({ expansionPerK: 7e-6, halfRangePerK: 1e-6, tag: 'common practice' });
    expect(new Set(materials.map((material) => material.key)).size).toBe(materials.length);
  });

  it('names the known keys when a key is unknown', () => {
    expect(() => materialByKey('brass')).toThrow(/material must be one of aluminium, steel, silicon, granite/);
  });
});
