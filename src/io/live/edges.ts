// Positions at the edges of a live link's digital inputs (trigger, reference mark): one edge latch per axis
// over the shared chain's position blocks. See docs/trigger-edges.md.

import { Observable, type OperatorFunction } from 'rxjs';
import { createEdgeLatch, type EdgeLatch, type EdgeLatchOptions, type EdgePosition } from '../../core/index.js';
import type { LinkEvent } from '../serial/index.js';
import type { LinkGap } from './link-reader.js';
import type { LivePositions } from './track-link.js';

/** The position of one axis at one edge, with the time base. */
export interface LiveEdgePosition extends EdgePosition {
  readonly kind: 'edge';
  /** Axis name and index in the chain. */
  readonly axis: string;
  readonly axisIndex: number;
  /** Time of the edge from the first sample, s: sampleTime / rateHz. */
  readonly timeS: number;
  readonly rateHz: number;
}

/** Readings the latch takes: what `trackLink(...).readings$` hands out. */
type Reading = LivePositions | LinkGap | LinkEvent | { readonly kind: string };

/** Edge latches of every axis of a live chain, fed reading by reading (for a sink that is not an observable). */
export interface LiveEdgeLatch {
  /** Takes one reading; returns the edges it completed (fresh records, time order per axis, axis after axis). */
  push(reading: Reading): LiveEdgePosition[];
  /** The edges still waiting for a later sample, from what is known (end of the stream). */
  flush(): LiveEdgePosition[];
}

/** One latch per axis over the readings; options are checked here. */
export function createLiveEdgeLatch(options: EdgeLatchOptions = {}): LiveEdgeLatch {
  createEdgeLatch(options);
  const latches: EdgeLatch[] = [];
  const names: string[] = [];
  const out: EdgePosition[] = [];
  let rateHz = Number.NaN;
  const take = (axisIndex: number, into: LiveEdgePosition[]) => {
    for (const edge of out) into.push({ ...edge, kind: 'edge', axis: names[axisIndex]!, axisIndex, timeS: edge.sampleTime / rateHz, rateHz });
    out.length = 0;
  };
  return {
    push(reading) {
      const edges: LiveEdgePosition[] = [];
      if (reading.kind !== 'positions') return edges;
      const { block, summaries } = reading as LivePositions;
      rateHz = block.rateHz;
      summaries.forEach((summary, k) => {
        if (latches[k] === undefined) {
          latches[k] = createEdgeLatch(options);
          names[k] = summary.name;
        }
        const latch = latches[k]!;
        for (let e = 0; e < block.edgeCount; e++) latch.addEdge(block.edgeTime[e]!, block.edgeLine[e]!, block.edgeRising[e] === 1);
        const { positionM, velocityMS, flags } = summary.output;
        latch.process(positionM, velocityMS, flags, summary.length, summary.firstSampleIndex, out);
        take(k, edges);
      });
      return edges;
    },
    flush() {
      const edges: LiveEdgePosition[] = [];
      latches.forEach((latch, k) => {
        latch.flush(out);
        take(k, edges);
      });
      return edges;
    },
  };
}

/**
 * Live readings → the position of every axis at every edge the frames carry, in time order per axis, as soon
 * as the sample after the edge's first following sample has been processed (the interpolation's error bound
 * needs it); the edges still waiting come out when the readings complete. Each record is fresh (edges are rare).
 */
export function latchEdges(options: EdgeLatchOptions = {}): OperatorFunction<Reading, LiveEdgePosition> {
  createEdgeLatch(options); // checks the options here, not at the first subscription
  return (readings$) =>
    new Observable<LiveEdgePosition>((subscriber) => {
      const latch = createLiveEdgeLatch(options);
      return readings$.subscribe({
        next(reading) {
          for (const edge of latch.push(reading)) subscriber.next(edge);
        },
        error: (error: unknown) => subscriber.error(error),
        complete() {
          for (const edge of latch.flush()) subscriber.next(edge);
          subscriber.complete();
        },
      });
    });
}
