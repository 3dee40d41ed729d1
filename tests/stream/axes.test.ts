// The axis builder in virtual time: shared pipeline, per-subscriber update rate with min/max since the last
// update, held-back updates for slow subscribers, several axes from one frame, alarms, status and trace.
// Check values: displacement per fringe λ/(N·n), λ = 632.9908 nm, N = 2 (CIPM 2007, published; common practice).
import { describe, expect, it } from 'vitest';
import { defer, lastValueFrom, map, Observable, take, throwError, timer, toArray, concat } from 'rxjs';
import { TestScheduler } from 'rxjs/testing';
import { createAxes, type AxisBlock, type FrameBlock } from '../../src/stream/index.js';
import { axisBlocks, axisOptions, ellipse, frame, METRES_PER_FRINGE, quadrature, ramp, round } from './signal.js';

function scheduler(): TestScheduler {
  return new TestScheduler((actual, expected) => expect(actual).toEqual(expected));
}

// An invented motion: 4 fringes over 4000 samples at constant speed (1 fringe per ms at 1 MHz).
const motion = quadrature(ramp(4000, 4));
const blocks = axisBlocks(motion.x, motion.y, Array.from({ length: 39 }, (_, k) => 100 * (k + 1)));

/** Block k at 10k + 5 ms of virtual time (never on an update tick), `count` blocks. */
function timedSource(ts: TestScheduler, count: number, counter?: { subscriptions: number }): Observable<AxisBlock> {
  return defer(() => {
    if (counter) counter.subscriptions++;
    return timer(5, 10, ts).pipe(take(count), map((k) => blocks[k]!));
  });
}

const fringes = (metres: number) => round(metres / METRES_PER_FRINGE, 6);

describe('createAxes', () => {
  it('updates at the chosen rate with the latest position and min/max since the last update', () => {
    const ts = scheduler();
    ts.run(({ expectObservable }) => {
      const axes = createAxes(timedSource(ts, 20), { axes: [axisOptions], scheduler: ts });
      const positions = axes.axes[0]!.position$({ updateHz: 10 }).pipe(
        map((p) => ({ sampleIndex: p.sampleIndex, at: fringes(p.positionM), min: fringes(p.minM), max: fringes(p.maxM) })),
      );
      // Ticks at 100 ms (blocks 0..9) and the flush at completion, 195 ms (blocks 10..19).
      expectObservable(positions).toBe('100ms a 94ms (b|)', {
        a: { sampleIndex: 999, at: 0.999, min: 0, max: 0.999 },
        b: { sampleIndex: 1999, at: 1.999, min: 1, max: 1.999 },
      });
    });
  });

  it('shares one pipeline among subscribers with different rates', () => {
    const ts = scheduler();
    const counter = { subscriptions: 0 };
    ts.run(({ expectObservable }) => {
      const axes = createAxes(timedSource(ts, 20, counter), { axes: [axisOptions], scheduler: ts });
      const axis = axes.axes[0]!;
      expectObservable(axis.position$({ updateHz: 20 }).pipe(map((p) => p.sampleIndex))).toBe('50ms a 49ms b 49ms c 44ms (d|)', {
        a: 499, b: 999, c: 1499, d: 1999,
      });
      expectObservable(axis.velocity$({ updateHz: 5 }).pipe(map((v) => v.sampleIndex))).toBe('195ms (a|)', { a: 1999 });
    });
    expect(counter.subscriptions).toBe(1);
  });

  it('holds updates back while the subscriber is not ready, then covers the whole span', () => {
    const ts = scheduler();
    ts.run(({ expectObservable }) => {
      const axes = createAxes(timedSource(ts, 40), { axes: [axisOptions], scheduler: ts });
      let ticks = 0;
      const ready = () => ++ticks !== 1; // a full socket at the first tick
      const updates = axes.axes[0]!.update$({ updateHz: 10, ready }).pipe(
        map((u) => ({ samples: u.samples, min: fringes(u.positionMinM), max: fringes(u.positionMaxM) })),
      );
      expectObservable(updates).toBe('200ms a 99ms b 94ms (c|)', {
        a: { samples: 2000, min: 0, max: 1.999 },
        b: { samples: 1000, min: 2, max: 2.999 },
        c: { samples: 1000, min: 3, max: 3.999 },
      });
    });
  });

  it('gives one update per block without updateHz, with the speed of the motion', async () => {
    const axes = createAxes(concat(blocks.slice(0, 10)), { axes: [axisOptions] });
    const updates = await lastValueFrom(axes.axes[0]!.update$().pipe(toArray()));
    expect(updates.map((u) => u.samples)).toEqual(Array(10).fill(100));
    // 1 fringe per 1000 samples at 1 MHz: 1000 fringes/s × λ/2 (common practice), loop settled by the end.
    expect(updates[9]!.velocityMS).toBeCloseTo(1000 * METRES_PER_FRINGE, 6);
    expect(updates[9]!.level).toBeCloseTo(1, 6);
  });

  it('builds three axes from six-channel frames, each with its own motion', async () => {
    const speeds = [1, -2, 0.5];
    const signals = speeds.map((fringesTotal) => quadrature(ramp(3000, fringesTotal)));
    const frames: FrameBlock[] = Array.from({ length: 10 }, (_, k) => frame(signals, 300 * k, 300));
    const axes = createAxes(concat(frames), {
      axes: [
        { ...axisOptions, name: 'X' },
        { ...axisOptions, name: 'Y' },
        { ...axisOptions, name: 'Z' },
      ],
    });
    const last = await lastValueFrom(axes.update$());
    expect(last.axes.map((a) => a.name)).toEqual(['X', 'Y', 'Z']);
    // Sample 2999 of a ramp of F fringes over 3000 samples: F·2999/3000 fringes; int16 rounding of the
    // samples moves the phase by about 1e-4 rad, so compare to 1e-4 fringe.
    last.axes.forEach((axis, k) => expect(axis.positionM / METRES_PER_FRINGE).toBeCloseTo((speeds[k]! * 2999) / 3000, 4));
  });

  it('reports alarms as events and status changes, and input gaps', async () => {
    const dark = { x: new Float64Array(200).fill(ellipse.offsetX), y: new Float64Array(200).fill(ellipse.offsetY), length: 200 };
    const source = concat([blocks[0]!, dark, { ...blocks[3]!, gapBefore: 100 }, blocks[4]!, blocks[5]!]);
    const axes = createAxes(source, { axes: [{ ...axisOptions, name: 'X' }] });
    const axis = axes.axes[0]!;
    const [events, statuses] = await Promise.all([
      lastValueFrom(axis.alarms$.pipe(map((e) => `${e.axis} ${e.kind} ${e.state} @${e.sampleIndex}`), toArray())),
      lastValueFrom(axis.status$.pipe(map((s) => `${s.sampleIndex}:${s.alarms}`), toArray())),
    ]);
    expect(events).toContain('X lowSignal raised @100');
    expect(events).toContain('X inputGap raised @400');
    expect(statuses[0]).toBe('99:');
    expect(statuses[1]).toBe('299:low_signal');
    expect(statuses.length).toBeGreaterThan(2);
  });

  it('bounds the events carried by one update and counts the rest', async () => {
    const dark = { x: new Float64Array(100).fill(ellipse.offsetX), y: new Float64Array(100).fill(ellipse.offsetY), length: 100 };
    const pattern = [dark, blocks[1]!, dark, blocks[3]!, dark, blocks[5]!];
    // Every event of the run, uncapped, from alarms$ (three dark blocks raise low_signal and the light ones after them clear it; the phase jumps add more).
    const all = await lastValueFrom(createAxes(concat(pattern), { axes: [axisOptions] }).alarms$.pipe(toArray()));
    expect(all.filter((e) => e.kind === 'lowSignal').length).toBe(6);
    const ts = scheduler();
    ts.run(({ expectObservable }) => {
      const source = timer(5, 10, ts).pipe(take(6), map((k) => pattern[k]!));
      const axes = createAxes(source, { axes: [axisOptions], scheduler: ts, maxEventsPerUpdate: 2 });
      const updates = axes.update$({ updateHz: 1 }).pipe(map((u) => ({ events: u.axes[0]!.events.length, dropped: u.axes[0]!.eventsDropped })));
      expectObservable(updates).toBe('55ms (a|)', { a: { events: 2, dropped: all.length - 2 } });
    });
  });

  it('carries a bounded trace of raw and corrected points when asked', async () => {
    const axes = createAxes(concat(blocks), { axes: [axisOptions], tracePoints: 64, tracePointsPerBlock: 8 });
    const last = await lastValueFrom(axes.update$({ trace: true }));
    const trace = last.axes[0]!.trace!;
    expect(trace.x.length).toBe(64);
    // Corrected points lie on the unit circle (float32 storage: 1e-6).
    for (let j = 0; j < 64; j++) expect(Math.hypot(trace.u[j]!, trace.v[j]!)).toBeCloseTo(1, 5);
    // Oldest first: the last point is the last block's 8th pick, sample 3900 + 87.
    expect(trace.x[63]).toBeCloseTo(motion.x[3987]!, 2);
  });

  it('passes a source error on after flushing the pending update', () => {
    const ts = scheduler();
    ts.run(({ expectObservable }) => {
      const failure = new Error('link down');
      const source = concat(timer(5, 10, ts).pipe(take(3), map((k) => blocks[k]!)), throwError(() => failure));
      const axes = createAxes(source, { axes: [axisOptions], scheduler: ts });
      expectObservable(axes.update$({ updateHz: 10 }).pipe(map((u) => u.axes[0]!.samples))).toBe('25ms (a#)', { a: 300 }, failure);
    });
  });

  it('rejects invalid options and mismatched frames with messages naming the rule', async () => {
    expect(() => createAxes(concat([]), { axes: [] })).toThrow('axes.length must be an integer in 1..8 (got 0)');
    expect(() => createAxes(concat([]), { axes: [axisOptions, axisOptions].map((o) => ({ ...o, name: 'X' })) })).toThrow(/axes\[\]\.name must be unique/);
    expect(() => createAxes(concat([]), { axes: [{ ...axisOptions, name: 'bad name' }] })).toThrow('axes[0].name must be 1..32 characters');
    const axes = createAxes(concat([frame([motion], 0, 10)]), { axes: [axisOptions, axisOptions] });
    expect(() => axes.update$({ updateHz: 0 })).toThrow('updateHz must be a positive finite number (got 0)');
    await expect(lastValueFrom(axes.update$())).rejects.toThrow("block.channelCount must be at least 4 for the axes' channels (got 2)");
  });
});
