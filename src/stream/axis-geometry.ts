// Operator: updates of several parallel axes in, yaw, pitch and the displacement of a point of interest out (the
// geometry and its conventions are in src/core/axis-geometry.ts), with their combined standard uncertainties.
import { Observable, type OperatorFunction } from 'rxjs';
import { createAxisGeometry, OptionError, type AxisGeometryOptions } from '../core/index.js';
import type { AxesUpdate } from './axes.js';

export interface AxisGeometryStreamOptions extends AxisGeometryOptions {
  /** Names of the axes that carry the beams, in the order of `beams`; default the first `beams.length` axes in order. */
  readonly axes?: readonly string[];
}

/** One geometry result; NaN for an angle the beams do not measure. Angles in rad, lengths in m. */
export interface GeometryUpdate {
  /** Sample index of the oldest of the axes' latest values (the axes run from one clock). */
  readonly sampleIndex: number;
  readonly yawRad: number;
  readonly pitchRad: number;
  readonly pointM: number;
  readonly yawUncertaintyRad: number;
  readonly pitchUncertaintyRad: number;
  readonly pointUncertaintyM: number;
}

/**
 * Solves the geometry of each update from the latest position of each beam's axis. Options are checked when the
 * operator is built; an update that lacks a named axis errors the stream with the names it has.
 */
export function axisGeometry(options: AxisGeometryStreamOptions): OperatorFunction<AxesUpdate, GeometryUpdate> {
  createAxisGeometry(options); // validates now, at the call site
  const names = options.axes;
  if (names !== undefined && names.length !== options.beams.length) {
    throw new OptionError('axes', `one axis name per beam (${options.beams.length})`, names);
  }
  return (source) =>
    new Observable<GeometryUpdate>((subscriber) => {
      const geometry = createAxisGeometry(options);
      const readings = new Float64Array(geometry.beams);
      const out = new Float64Array(6);
      let order: number[] | null = null;
      return source.subscribe({
        next(update) {
          if (order === null) {
            const present = update.axes.map((axis) => axis.name);
            const wanted = names ?? present.slice(0, geometry.beams);
            const found = wanted.map((name) => present.indexOf(name));
            const missing = wanted.filter((_, k) => found[k] === -1);
            if (missing.length > 0 || wanted.length < geometry.beams) {
              subscriber.error(new Error(`axisGeometry: ${geometry.beams} axes needed (${wanted.join(', ') || 'none'}); the updates carry ${present.join(', ') || 'none'}`));
              return;
            }
            order = found;
          }
          let sampleIndex = Infinity;
          for (let k = 0; k < order.length; k++) {
            const axis = update.axes[order[k]!]!;
            readings[k] = axis.positionM;
            sampleIndex = Math.min(sampleIndex, axis.sampleIndex);
          }
          geometry.solve(readings, out);
          subscriber.next({
            sampleIndex,
            yawRad: out[0]!,
            pitchRad: out[1]!,
            pointM: out[2]!,
            yawUncertaintyRad: out[3]!,
            pitchUncertaintyRad: out[4]!,
            pointUncertaintyM: out[5]!,
          });
        },
        error: (error: unknown) => subscriber.error(error),
        complete: () => subscriber.complete(),
      });
    });
}
