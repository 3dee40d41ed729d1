// The count line CI reads must agree with the exit code: a file that fails in its set-up counts as failed.
import { execFile } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const VITEST = fileURLToPath(new URL('../../node_modules/vitest/vitest.mjs', import.meta.url));
const FIXTURES = fileURLToPath(new URL('./count-line/', import.meta.url));

function runFixtures(files: readonly string[], ci: boolean): Promise<{ code: number; countLine: string }> {
  const env = { ...process.env, CI: ci ? 'true' : 'false' };
  return new Promise((resolve) => {
    execFile(process.execPath, [VITEST, 'run', '--config', 'vitest.config.ts', ...files], { cwd: FIXTURES, env },
      (error, stdout) => {
        const code = error === null ? 0 : typeof error.code === 'number' ? error.code : 1;
        const countLine = stdout.split('\n').filter((line) => /^\d+ passed, \d+ failed, \d+ skipped$/.test(line)).join('|');
        resolve({ code, countLine });
      });
  });
}

describe('the count line', () => {
  it('counts the tests of a file whose set-up failed as failed, outside CI too', async () => {
    const run = await runFixtures(['setup-fails.check.ts', 'plain.check.ts'], false);
    expect(run.code).not.toBe(0);
    expect(run.countLine).toBe('1 passed, 2 failed, 1 skipped');
  });

  it('counts a skipped test as failed under CI, and as skipped elsewhere', async () => {
    expect((await runFixtures(['plain.check.ts'], false)).countLine).toBe('1 passed, 0 failed, 1 skipped');
    const ci = await runFixtures(['plain.check.ts'], true);
    expect(ci.code).not.toBe(0);
    expect(ci.countLine).toBe('1 passed, 1 failed, 1 skipped');
  });
});
