// Operator: updates of several parallel axes in, yaw, pitch and the displacement of a point of interest out (the
// geometry and its conventions are in src/core/axis-geometry.ts), with their combined standard uncertainties.
import type { OperatorFunction } from 'rxjs';
import { blockOperator } from './block-operator.js';
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

/** Solves one axes update; built for a known set of axis names (`createUpdateGeometry`). */
export interface UpdateGeometry {
  solve(update: AxesUpdate): GeometryUpdate;
}

/**
 * The geometry solver for updates whose axes are named `axisNames` (in update order): checks the options and that
 * every beam's axis is there, so that `solve` never throws. Shared by the operator and the network feed.
 */
export function createUpdateGeometry(options: AxisGeometryStreamOptions, axisNames: readonly string[]): UpdateGeometry {
  const geometry = createAxisGeometry(options);
  if (options.axes !== undefined && options.axes.length !== geometry.beams) {
    throw new OptionError('axes', `one axis name per beam (${geometry.beams})`, options.axes);
  }
  const wanted = options.axes ?? axisNames.slice(0, geometry.beams);
  const order = wanted.map((name) => axisNames.indexOf(name));
  if (wanted.length < geometry.beams || order.includes(-1)) {
    throw new Error(`axisGeometry: ${geometry.beams} axes needed (${wanted.join(', ') || 'none'}); the updates carry ${axisNames.join(', ') || 'none'}`);
  }
  const readings = new Float64Array(geometry.beams);
  const out = new Float64Array(6);
  return {
    solve(update) {
      let sampleIndex = Infinity;
      for (let k = 0; k < order.length; k++) {
        const axis = update.axes[order[k]!]!;
        readings[k] = axis.positionM;
        sampleIndex = Math.min(sampleIndex, axis.sampleIndex);
      }
      geometry.solve(readings, out);
      return {
        sampleIndex,
        yawRad: out[0]!,
        pitchRad: out[1]!,
        pointM: out[2]!,
        yawUncertaintyRad: out[3]!,
        pitchUncertaintyRad: out[4]!,
        pointUncertaintyM: out[5]!,
      };
    },
  };
}

/**
 * Solves the geometry of each update from the latest position of each beam's axis. Options are checked when the
 * operator is built; an update that lacks a named axis errors the stream with the names it has.
 */
export function axisGeometry(options: AxisGeometryStreamOptions): OperatorFunction<AxesUpdate, GeometryUpdate> {
  createAxisGeometry(options); // validates now, at the call site
  if (options.axes !== undefined && options.axes.length !== options.beams.length) {
    throw new OptionError('axes', `one axis name per beam (${options.beams.length})`, options.axes);
  }
  return blockOperator(() => {
    let solver: UpdateGeometry | null = null;
    return {
      next(update, out) {
        solver ??= createUpdateGeometry(options, update.axes.map((axis) => axis.name));
        out.push(solver.solve(update));
      },
    };
  });
}
