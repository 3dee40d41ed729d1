// Operator: the whole core signal chain (correction → monitor → phase tracker → displacement) over blocks.

import type { OperatorFunction } from 'rxjs';
import { blockOperator } from './block-operator.js';
import { createPipeline } from '../accel/pipeline.js';
import type { AlarmEvent, PipelineOptions } from '../core/index.js';
import { checkAxisBlock, type AxisBlock, type PositionBlock } from './blocks.js';

/** Per-subscription output buffers that grow once to the largest block and hand out views of one length. */
export function createPositionBuffers(initialCapacity: number) {
  let positionM = new Float64Array(initialCapacity);
  let velocityMS = new Float64Array(initialCapacity);
  let level = new Float32Array(initialCapacity);
  let flags = new Uint8Array(initialCapacity);
  let views = { positionM, velocityMS, level, flags };
  return {
    /** Output views of exactly `length` samples; new views only when the length changes. */
    views(length: number) {
      if (length > positionM.length) {
        positionM = new Float64Array(length);
        velocityMS = new Float64Array(length);
        level = new Float32Array(length);
        flags = new Uint8Array(length);
      }
      if (views.positionM.buffer !== positionM.buffer || views.positionM.length !== length) {
        views = {
          positionM: positionM.subarray(0, length),
          velocityMS: velocityMS.subarray(0, length),
          level: level.subarray(0, length),
          flags: flags.subarray(0, length),
        };
      }
      return views;
    },
  };
}

/**
 * Blocks → position blocks. A fresh pipeline per subscription (so each subscriber counts from zero), gaps
 * marked before their block, buffers reused per block (see `PositionBlock`) and released at teardown.
 */
export function trackPosition(options: PipelineOptions): OperatorFunction<AxisBlock, PositionBlock> {
  createPipeline(options); // validates the options now, at the call site
  return blockOperator(() => {
    const pipeline = createPipeline(options);
    let buffers: ReturnType<typeof createPositionBuffers> | null = createPositionBuffers(options.blockCapacity ?? 0); // grows to the first block without it
    const events: AlarmEvent[] = [];
    return {
      next(block, out) {
        checkAxisBlock(block);
        if (block.gapBefore) pipeline.markGap(block.gapBefore);
        const firstSampleIndex = pipeline.nextSampleIndex;
        const views = buffers!.views(block.length);
        events.length = 0;
        pipeline.process(block.x, block.y, block.length, views, events);
        out.push({ firstSampleIndex, length: block.length, ...views, events, countLost: pipeline.countLost });
      },
      teardown() {
        buffers = null;
        events.length = 0;
      },
    };
  });
}
