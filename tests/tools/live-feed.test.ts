// The network side of `listen` on its own: a failure of the feed's chain is reported, never dropped.
import { describe, expect, it } from 'vitest';
import { openLiveFeed } from '../../tools/live/live-feed.js';

describe('live feed', () => {
  it('reports a failure of its chain to the caller instead of going quiet', async () => {
    const errors: Error[] = [];
    const feed = await openLiveFeed(
      { serve: { host: '127.0.0.1', port: 0, tokenSource: null, allowedOrigins: [], trustedProxies: [] }, mqtt: null },
      (error) => errors.push(error),
      () => {},
    );
    try {
      feed.start({ rateHz: 1000, settings: { wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1 }, calibration: null });
      feed.push({ x: new Int16Array(4), y: new Int16Array(4), length: 4, gapBefore: 0 });
      expect(errors).toEqual([]);
      // A block that claims more samples than it holds breaks the chain: the caller must hear of it.
      feed.push({ x: new Int16Array(4), y: new Int16Array(4), length: 8, gapBefore: 0 });
      expect(errors).toHaveLength(1);
      expect(errors[0]!.message).toMatch(/length/);
    } finally {
      await feed.close();
    }
  });
});
