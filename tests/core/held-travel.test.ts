// Unseen travel while the phase is held (a beam interruption): no false count_lost when the interruption
// starts as the stage stops, and never a wrong count without count_lost. Check values are the simulated
// trajectories themselves (truth): a held phase re-acquired after travel T is right only while |T| < π (half a
// fringe, common practice, docs/references.md), and the tracker's bound is heldTravelRad = π/2 (its documented default).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createPhaseTracker, createRandom, type AlarmEvent } from '../../src/core/index.js';

const RATE_HZ = 1e6;
const HELD_LEVEL = 0.01; // a blocked beam: far below the tracker's 0.3

interface Motion {
  /** Phase per sample, rad (truth). */
  readonly phase: Float64Array;
  /** First held sample and number of held samples. */
  readonly holdStart: number;
  readonly holdLength: number;
}

/**
 * At rest, then steps of `speeds` (one per sample, rad/sample); the beam is blocked for `holdLength` samples
 * from `holdStart`, while the stage keeps the speed it had at the hold's start; then 300 samples more.
 */
function motion(speeds: readonly number[], holdLength: number): Motion {
  const settle = 3000; // the loop settles at rest first
  const after = 300;
  const holdStart = settle + speeds.length;
  const last = speeds.length > 0 ? speeds[speeds.length - 1]! : 0;
  const n = holdStart + holdLength + after;
  const phase = new Float64Array(n);
  for (let i = settle + 1; i < n; i++) phase[i] = phase[i - 1]! + (i - settle - 1 < speeds.length ? speeds[i - settle - 1]! : last);
  return { phase, holdStart, holdLength };
}

function track({ phase, holdStart, holdLength }: Motion, noiseRad: number, seed: number) {
  const n = phase.length;
  const random = createRandom(seed);
  const u = new Float64Array(n);
  const v = new Float64Array(n);
  const level = new Float32Array(n).fill(1);
  for (let i = 0; i < n; i++) {
    u[i] = Math.cos(phase[i]!) + noiseRad * random.gaussian();
    v[i] = Math.sin(phase[i]!) + noiseRad * random.gaussian();
  }
  level.fill(HELD_LEVEL, holdStart, holdStart + holdLength);
  const tracker = createPhaseTracker({ rateHz: RATE_HZ });
  const out = { turns: new Float64Array(n), phaseRad: new Float64Array(n), stepRad: new Float64Array(n), flags: new Uint8Array(n) };
  const events: AlarmEvent[] = [];
  tracker.process(u, v, level, n, 0, out, events);
  const measured = out.turns[n - 1]! + out.phaseRad[n - 1]! / (2 * Math.PI);
  const errorFringes = measured - (phase[n - 1]! - phase[0]!) / (2 * Math.PI);
  return {
    countLost: events.some((e) => e.kind === 'countLost' && e.state === 'raised'),
    errorFringes,
    /** The loop's speed at the hold's start, rad/sample: what the unseen travel was integrated from before. */
    loopSpeed: Math.abs(out.stepRad[holdStart - 1]!),
  };
}

/** Cruise at v0, then decelerate at `decel` to rest, rest `rest` samples. */
function stopSpeeds(v0: number, decel: number, rest: number): number[] {
  const speeds: number[] = new Array<number>(2000).fill(v0);
  for (let v = v0 - decel; v > 0; v -= decel) speeds.push(v);
  for (let i = 0; i <= rest; i++) speeds.push(0);
  return speeds;
}

describe('unseen travel while the phase is held', () => {
  it('an interruption that starts as the stage stops raises no count_lost (no fringe could be missed)', () => {
    // Decelerations of 15–50 m/s² (1 MHz, fold 2, 633 nm) and interruptions up to 0.23 ms: the loop's lagging
    // speed times the interruption (the bound before) exceeds π/2 in many of these runs; see docs/signal-chain.md
    // for the interruption a stop tolerates before and now over a wider range.
    let oldBoundWouldFlag = 0;
    let runs = 0;
    fc.assert(
      fc.property(
        fc.double({ min: 0.02, max: 0.5, noNaN: true }), // cruise speed, rad/sample
        fc.double({ min: 3e-4, max: 1e-3, noNaN: true }), // deceleration, rad/sample²
        fc.integer({ min: 0, max: 10 }), // samples at rest before the interruption
        fc.integer({ min: 150, max: 230 }), // interruption, samples
        fc.double({ min: 0, max: 1e-3, noNaN: true }), // phase noise, rad (up to 0.1 % of the radius)
        fc.integer({ min: 1, max: 2 ** 31 }),
        (v0, decel, rest, holdLength, noiseRad, seed) => {
          const result = track(motion(stopSpeeds(v0, decel, rest), holdLength), noiseRad, seed);
          runs++;
          if (result.loopSpeed * holdLength > Math.PI / 2) oldBoundWouldFlag++;
          expect(result.countLost).toBe(false);
          expect(Math.abs(result.errorFringes)).toBeLessThan(0.01);
        },
      ),
      { numRuns: 60 },
    );
    expect(oldBoundWouldFlag).toBeGreaterThan(runs / 6);
  });

  it('a short dropout in fast velocity-aided motion is not taken for a miss (the step across it is as expected)', () => {
    // 0.11 fringe per sample (0.7 rad), the level gone for 2 samples: 2.1 rad across the dropout, all of it foreseen.
    const n = 3000;
    const phase = Float64Array.from({ length: n }, (_, i) => (i < 200 ? 0 : 0.7 * (i - 200)));
    const random = createRandom(5);
    const u = Float64Array.from(phase, (p) => Math.cos(p) + 1e-3 * random.gaussian());
    const v = Float64Array.from(phase, (p) => Math.sin(p) + 1e-3 * random.gaussian());
    const level = new Float32Array(n).fill(1).fill(HELD_LEVEL, 2000, 2002);
    const out = { turns: new Float64Array(n), phaseRad: new Float64Array(n), stepRad: new Float64Array(n), flags: new Uint8Array(n) };
    const events: AlarmEvent[] = [];
    createPhaseTracker({ rateHz: RATE_HZ, unwrap: 'velocity-aided' }).process(u, v, level, n, 0, out, events);
    expect(events.filter((e) => e.kind === 'countLost')).toEqual([]);
    expect(Math.abs(out.turns[n - 1]! + out.phaseRad[n - 1]! / (2 * Math.PI) - phase[n - 1]! / (2 * Math.PI))).toBeLessThan(0.01);
  });

  it('never a wrong count without count_lost, and count_lost whenever a fringe could be missed', () => {
    fc.assert(
      fc.property(
        fc.double({ min: 0, max: 0.5, noNaN: true }), // speed before the change, rad/sample
        fc.double({ min: 0, max: 0.5, noNaN: true }), // speed after it (kept through the interruption)
        fc.double({ min: 1e-5, max: 1e-3, noNaN: true }), // acceleration of the change, rad/sample²
        // Samples at the new speed before the interruption: from 20 on, the estimates have seen the new speed
        // through the noise (a start a few samples before a blocked beam is the limit, see docs/signal-chain.md).
        fc.integer({ min: 20, max: 100 }),
        fc.integer({ min: 1, max: 3000 }),
        fc.double({ min: 0, max: 3e-3, noNaN: true }),
        fc.integer({ min: 1, max: 2 ** 31 }),
        (from, to, accel, steady, holdLength, noiseRad, seed) => {
          const speeds: number[] = new Array<number>(2000).fill(from);
          const direction = to > from ? 1 : -1;
          for (let v = from + direction * accel; direction * (to - v) > 0; v += direction * accel) speeds.push(v);
          for (let i = 0; i <= steady; i++) speeds.push(to);
          const result = track(motion(speeds, holdLength), noiseRad, seed);
          const unseen = to * holdLength;
          if (unseen >= Math.PI) expect(result.countLost).toBe(true);
          if (!result.countLost) expect(Math.abs(result.errorFringes)).toBeLessThan(0.01);
        },
      ),
      { numRuns: 150 },
    );
  });
});
