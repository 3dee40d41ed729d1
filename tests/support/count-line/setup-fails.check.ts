// Fixture for tests/support/count-reporter.test.ts: a file whose set-up fails before its tests run.
import { beforeAll, expect, it } from 'vitest';

beforeAll(() => {
  throw new Error('the browser this suite needs is missing');
});
it('would pass', () => expect(1).toBe(1));
it('would pass too', () => expect(2).toBe(2));
