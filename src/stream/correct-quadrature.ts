// Operator: ellipse correction of quadrature blocks (Heydemann 1981), x, y → u, v on the unit circle.

import type { OperatorFunction } from 'rxjs';
import { blockOperator } from './block-operator.js';
import { createCorrection, type CorrectionOptions } from '../core/index.js';
import { checkAxisBlock, createScratch, type AxisBlock, type CorrectedBlock } from './blocks.js';

/** Blocks → corrected blocks; one correction stage and one pair of buffers per subscription, freed at teardown. */
export function correctQuadrature(options: CorrectionOptions): OperatorFunction<AxisBlock, CorrectedBlock> {
  createCorrection(options); // validates the options now, at the call site
  return blockOperator(() => {
    const correction = createCorrection(options);
    let u: ReturnType<typeof createScratch> | null = createScratch(4096);
    let v: ReturnType<typeof createScratch> | null = createScratch(4096);
    return {
      next(block, out) {
        checkAxisBlock(block);
        const uBlock = u!.view(block.length);
        const vBlock = v!.view(block.length);
        correction.process(block.x, block.y, uBlock, vBlock, block.length);
        out.push({ u: uBlock, v: vBlock, length: block.length });
      },
      teardown() {
        u = null;
        v = null;
      },
    };
  });
}
