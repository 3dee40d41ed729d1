// Views of a block's length kept for the last two lengths asked for: a live feed's blocks often alternate between
// two lengths (a chunk of bytes holds n or n + 1 frames), and views made anew for every block were most of what a
// block allocated on that path (the steady kernel's copies out, the axes' pipeline outputs, the link reader's
// samples).

export interface RecentViews<T> {
  /** What `make(length)` gave for this length, if it is one of the last two asked for; else made now. */
  get(length: number): T;
  /** Forgets both: the arrays the views were made on have been replaced. */
  clear(): void;
}

export function createRecentViews<T>(make: (length: number) => T): RecentViews<T> {
  let length = -1;
  let value: T | null = null;
  let spareLength = -1;
  let spare: T | null = null;
  return {
    get(wanted) {
      if (wanted !== length) {
        const next = wanted === spareLength ? spare! : make(wanted);
        spareLength = length;
        spare = value;
        length = wanted;
        value = next;
      }
      return value!;
    },
    clear() {
      length = spareLength = -1;
      value = spare = null;
    },
  };
}
