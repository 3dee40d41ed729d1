// Angles and the point of interest from several parallel axes. Check values: hand-worked geometry (small-angle and
// uncertainty), and a rigid body built from its rotation matrix R = R_y(ψ)·R_x(θ) with the readings taken as the
// intersections of each beam with the turned mirror plane (geometry from the definitions, not the closed forms
// under test). Abbe error h·θ: common practice (docs/references.md; Bryan 1979, memory).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createAxisGeometry, type BeamPlacement } from '../../src/core/index.js';

/** Rotation R = R_y(psi)·R_x(theta), row-major. */
function rotation(psi: number, theta: number): number[] {
  const ry = [Math.cos(psi), 0, Math.sin(psi), 0, 1, 0, -Math.sin(psi), 0, Math.cos(psi)];
  const rx = [1, 0, 0, 0, Math.cos(theta), -Math.sin(theta), 0, Math.sin(theta), Math.cos(theta)];
  const r = new Array<number>(9).fill(0);
  for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) for (let k = 0; k < 3; k++) r[i * 3 + j]! += ry[i * 3 + k]! * rx[k * 3 + j]!;
  return r;
}

/** Beam at (x, y) along z meets the plane through (0, 0, d) with normal R·ẑ. */
function reading(r: number[], d: number, x: number, y: number): number {
  const n = [r[2]!, r[5]!, r[8]!];
  return d - (n[0]! * x + n[1]! * y) / n[2]!;
}

const solve = (geometry: ReturnType<typeof createAxisGeometry>, readings: number[]) => {
  const out = new Float64Array(6);
  geometry.solve(readings, out);
  return { yaw: out[0]!, pitch: out[1]!, point: out[2]!, uYaw: out[3]!, uPitch: out[4]!, uPoint: out[5]! };
};

describe('createAxisGeometry', () => {
  it('two beams 100 mm apart in x: a hand-worked yaw and Abbe correction', () => {
    // Hand-worked: readings 10 µm and 12 µm at x = −50 mm and +50 mm: slope 2 µm / 100 mm = 2e-5, so ψ = −20 µrad
    // (yaw about +y lowers the readings at +x); the frame origin moved 11 µm; a point 200 mm out in x moved
    // 11 + 0.2 · 2e-5 · 1e6 = 15 µm. Exact: ψ = −atan(2e-5) and sin ψ differ from the small-angle values by
    // about 3e-15 rad and 1e-15 m here (the cubic terms), so both models agree to 1e-14.
    for (const model of ['exact', 'small-angle'] as const) {
      const geometry = createAxisGeometry({ beams: [{ xM: -0.05, yM: 0 }, { xM: 0.05, yM: 0 }], pointOfInterest: { xM: 0.2, yM: 0 }, model });
      const result = solve(geometry, [10e-6, 12e-6]);
      expect(Math.abs(result.yaw - -2e-5)).toBeLessThan(1e-14);
      expect(result.pitch).toBeNaN();
      expect(Math.abs(result.point - 15e-6)).toBeLessThan(1e-14);
      expect(geometry.measures).toEqual({ yaw: true, pitch: false });
    }
  });

  it('combines the reading and placement uncertainties: hand-worked', () => {
    // Two beams at x = ±50 mm, 1 nm standard uncertainty each: u(ψ) = √(1² + 1²) nm / 100 mm = 1.41421e-8 rad.
    // Point at x = 200 mm: weights 0.5 ∓ 0.2/0.1 = −1.5 and 2.5, u = √(1.5² + 2.5²) nm = 2.91548 nm; with the point's
    // place known to 1 mm and a slope of 2e-5, add (2e-5 · 1 mm)² = (20 nm)²: u = √(2.91548² + 20²) = 20.2114 nm.
    const beams: BeamPlacement[] = [
      { xM: -0.05, yM: 0, readingUncertaintyM: 1e-9 },
      { xM: 0.05, yM: 0, readingUncertaintyM: 1e-9 },
    ];
    const still = solve(createAxisGeometry({ beams, pointOfInterest: { xM: 0.2, yM: 0, uncertaintyM: 1e-3 } }), [0, 0]);
    expect(still.uYaw).toBeCloseTo(1.41421356e-8, 15);
    expect(still.uPoint).toBeCloseTo(2.91547595e-9, 15);
    const tilted = solve(createAxisGeometry({ beams, pointOfInterest: { xM: 0.2, yM: 0, uncertaintyM: 1e-3 } }), [10e-6, 12e-6]);
    expect(tilted.uPoint).toBeCloseTo(20.2113e-9, 12);
  });

  it('recovers yaw, pitch and the displacement of any point of a turned and moved rigid body', () => {
    const coordinate = fc.double({ min: -0.3, max: 0.3, noNaN: true });
    fc.assert(
      fc.property(
        fc.double({ min: -0.2, max: 0.2, noNaN: true }),
        fc.double({ min: -0.2, max: 0.2, noNaN: true }),
        fc.double({ min: -0.01, max: 0.01, noNaN: true }),
        fc.tuple(coordinate, coordinate, coordinate),
        fc.integer({ min: 3, max: 6 }),
        fc.integer({ min: 0, max: 1000 }),
        (psi, theta, d, [xP, yP, zP], count, turn) => {
          // Beams on a circle of 40 mm radius about (20 mm, −10 mm): never all on one line.
          const beams = Array.from({ length: count }, (_, k) => {
            const angle = (2 * Math.PI * k) / count + turn / 100;
            return { xM: 0.02 + 0.04 * Math.cos(angle), yM: -0.01 + 0.04 * Math.sin(angle) };
          });
          const r = rotation(psi, theta);
          const readings = beams.map((b) => reading(r, d, b.xM, b.yM));
          const geometry = createAxisGeometry({ beams, pointOfInterest: { xM: xP, yM: yP, zM: zP } });
          const result = solve(geometry, readings);
          // The point P moves along z by (R·P)_z − z_P + d.
          const moved = r[6]! * xP + r[7]! * yP + r[8]! * zP - zP + d;
          expect(Math.abs(result.yaw - psi)).toBeLessThan(1e-12);
          expect(Math.abs(result.pitch - theta)).toBeLessThan(1e-12);
          expect(Math.abs(result.point - moved)).toBeLessThan(1e-13);
        },
      ),
    );
  });

  it('a pure translation gives zero angles and moves every point alike, in both models', () => {
    fc.assert(
      fc.property(fc.double({ min: -1, max: 1, noNaN: true }), fc.constantFrom('exact' as const, 'small-angle' as const), (d, model) => {
        const geometry = createAxisGeometry({ beams: [{ xM: 0, yM: 0 }, { xM: 0.1, yM: 0.02 }, { xM: -0.03, yM: 0.08 }, { xM: 0.05, yM: -0.06 }], pointOfInterest: { xM: 0.5, yM: -0.4, zM: 0.1 }, model });
        const result = solve(geometry, [d, d, d, d]);
        expect(Math.abs(result.yaw)).toBeLessThan(1e-15);
        expect(Math.abs(result.pitch)).toBeLessThan(1e-15);
        // A few rounding steps of the plane fit: 2e-15 relative.
        expect(Math.abs(result.point - d)).toBeLessThanOrEqual(2e-15 * Math.max(1, Math.abs(d)));
      }),
    );
  });

  it('the small-angle model departs from the exact one only to second order', () => {
    // Hand-worked from the series: for ψ = θ = 1 mrad and P = (0.2, 0.2, 0.2) m the small-angle model leaves out
    // z_P (1 − cos ψ cos θ) ≈ z_P (ψ² + θ²)/2 = 2e-7 m; the x_P and y_P terms are third order (under 5e-10 m).
    const beams = [{ xM: 0, yM: 0 }, { xM: 0.1, yM: 0 }, { xM: 0, yM: 0.1 }];
    const r = rotation(1e-3, 1e-3);
    const readings = beams.map((b) => reading(r, 0, b.xM, b.yM));
    const poi = { xM: 0.2, yM: 0.2, zM: 0.2 };
    const exact = solve(createAxisGeometry({ beams, pointOfInterest: poi }), readings);
    const small = solve(createAxisGeometry({ beams, pointOfInterest: poi, model: 'small-angle' }), readings);
    expect(Math.abs(small.point - exact.point - 2e-7)).toBeLessThan(1e-9);
    expect(Math.abs(exact.yaw - small.yaw)).toBeLessThan(1e-9);
  });

  it('processes blocks, and rejects beams that cannot give an angle', () => {
    const geometry = createAxisGeometry({ beams: [{ xM: 0, yM: -0.05 }, { xM: 0, yM: 0.05 }] });
    expect(geometry.measures).toEqual({ yaw: false, pitch: true });
    const output = {
      yawRad: new Float64Array(2),
      pitchRad: new Float64Array(2),
      pointM: new Float64Array(2),
      yawUncertaintyRad: new Float64Array(2),
      pitchUncertaintyRad: new Float64Array(2),
      pointUncertaintyM: new Float64Array(2),
    };
    expect(geometry.process([Float64Array.of(0, 1e-6), Float64Array.of(0, 2e-6)], output, 2)).toBe(2);
    expect(output.pitchRad[1]).toBeCloseTo(Math.atan(1e-5), 18); // slope 1 µm / 100 mm along y
    expect(output.yawRad[1]).toBeNaN();
    expect(output.pointM[1]).toBeCloseTo(1.5e-6, 18);
    expect(() => createAxisGeometry({ beams: [{ xM: 0, yM: 0 }, { xM: 0.1, yM: 0.1 }] })).toThrow(/beams must be two beams apart in x only \(yaw\) or in y only \(pitch\)/);
    expect(() => createAxisGeometry({ beams: [{ xM: 0, yM: 0 }, { xM: 0.1, yM: 0.1 }, { xM: 0.2, yM: 0.2 }] })).toThrow(/beams must be beams not all on one line/);
    expect(() => createAxisGeometry({ beams: [{ xM: 0, yM: 0 }] })).toThrow(/beams\.length must be an integer in 2\.\.8 \(got 1\)/);
  });
});
