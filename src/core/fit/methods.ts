// The ellipse fit by method name, over an `EllipseAccumulator`'s sums: the classic fit or a bias-reduced one
// (see conic-solver.ts), with the acceptance rules of the classic fit.

import { oneOf } from '../options.js';
import type { EllipseAccumulator } from './accumulator.js';
import { createConicSolver, DEFAULT_ELLIPSE_FIT_METHOD, ELLIPSE_FIT_METHODS, type EllipseFitMethod } from './conic-solver.js';
import type { EllipseFitResult } from './ellipse.js';
import { fitResult, resolveFitLimits, type EllipseFitOptions } from './limits.js';

/** Options of `createEllipseFit`: the classic fit's acceptance rules plus the method. */
export interface EllipseFitMethodOptions extends EllipseFitOptions {
  /**
   * 'heydemann' (classic algebraic fit, biased under noise), 'taubin' (Taubin 1991) or 'hyper' (hyper least
   * squares, Kanatani & Rangarajan 2011: second-order bias removed). Default 'hyper'.
   */
  readonly method?: EllipseFitMethod;
}

export interface EllipseFit {
  readonly method: EllipseFitMethod;
  /** Fits the accumulator's samples; same result shape and acceptance rules as `EllipseAccumulator.solve`. */
  solve(accumulator: EllipseAccumulator): EllipseFitResult;
}

export function createEllipseFit(options: EllipseFitMethodOptions = {}): EllipseFit {
  const method = oneOf('method', options.method ?? DEFAULT_ELLIPSE_FIT_METHOD, ELLIPSE_FIT_METHODS);
  const limits = resolveFitLimits(options);
  const solver = createConicSolver(method);
  return { method, solve: (accumulator) => fitResult(solver, accumulator.state, limits) };
}
