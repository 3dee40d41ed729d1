// Fixture for tests/support/count-reporter.test.ts: one passing and one skipped test.
import { expect, it } from 'vitest';

it('passes', () => expect(1).toBe(1));
it.skip('is skipped', () => expect(1).toBe(1));
