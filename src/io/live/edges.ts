// Positions at the edges of a live link's digital inputs (trigger, reference mark): one edge latch per axis
// over the shared chain's position blocks. See docs/trigger-edges.md.

import { Observable, type OperatorFunction } from 'rxjs';
import { createEdgeLatch, type EdgeLatch, type EdgePosition } from '../../core/index.js';
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

/** Readings the operator takes: what `trackLink(...).readings$` hands out. */
type Reading = LivePositions | LinkGap | LinkEvent | { readonly kind: string };

/**
 * Live readings → the position of every axis at every edge the frames carry, in time order per axis, as soon
 * as the sample after the edge's first following sample has been processed (the interpolation's error bound
 * needs it); the edges still waiting come out when the readings complete. Each record is fresh (edges are rare).
 */
export function latchEdges(options: { readonly timeResolutionSamples?: number } = {}): OperatorFunction<Reading, LiveEdgePosition> {
  createEdgeLatch(options); // checks the options here, not at the first subscription
  return (readings$) =>
    new Observable<LiveEdgePosition>((subscriber) => {
      const latches: EdgeLatch[] = [];
      const names: string[] = [];
      const out: EdgePosition[] = [];
      let rateHz = Number.NaN;
      const send = (axisIndex: number) => {
        for (const edge of out) {
          subscriber.next({ ...edge, kind: 'edge', axis: names[axisIndex]!, axisIndex, timeS: edge.sampleTime / rateHz, rateHz });
        }
        out.length = 0;
      };
      return readings$.subscribe({
        next(reading) {
          if (reading.kind !== 'positions') return;
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
            send(k);
          });
        },
        error: (error: unknown) => subscriber.error(error),
        complete() {
          latches.forEach((latch, k) => {
            latch.flush(out);
            send(k);
          });
          subscriber.complete();
        },
      });
    });
}
