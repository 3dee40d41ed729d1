// createRecentViews: the views of the last two lengths are handed out again, any other length makes new ones, and
// clear forgets both (the arrays under them replaced). The three users' own tests check their outputs with it.
import { describe, expect, it } from 'vitest';
import { createRecentViews } from '../../src/core/recent-views.js';

describe('recent views', () => {
  it('keeps the views of the last two lengths, makes others, and forgets both on clear', () => {
    let buffer = new Float64Array(16);
    const made: number[] = [];
    const views = createRecentViews((length) => {
      made.push(length);
      return buffer.subarray(0, length);
    });
    const eight = views.get(8);
    const six = views.get(6);
    expect(views.get(8)).toBe(eight); // alternating lengths: no new view
    expect(views.get(6)).toBe(six);
    expect(views.get(6)).toBe(six);
    expect(made).toEqual([8, 6]);
    const four = views.get(4); // a third length pushes out the older of the two (8)
    expect(views.get(6)).toBe(six);
    expect(views.get(4)).toBe(four);
    expect(views.get(8)).not.toBe(eight);
    expect(made).toEqual([8, 6, 4, 8]);
    buffer = new Float64Array(32);
    views.clear();
    const grown = views.get(8);
    expect(grown.buffer).toBe(buffer.buffer);
    expect(made).toEqual([8, 6, 4, 8, 8]);
  });
});
