import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';

describe('package', () => {
  it('exports one subpath per layer with types conditions', () => {
    const pkg = JSON.parse(readFileSync(new URL('../package.json', import.meta.url), 'utf8'));
    for (const subpath of ['.', './core', './stream', './io']) {
      expect(pkg.exports[subpath].types).toMatch(/\.d\.ts$/);
    }
    expect(pkg.type).toBe('module');
    expect(pkg.sideEffects).toBe(false);
  });
});
