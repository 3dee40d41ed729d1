// Ends the run with the plain line `N passed, N failed, N skipped`, which CI reads.
// A test that is skipped while CI=true counts as failed: CI must not pass on tests it did not run.
import type { Reporter, TestModule } from 'vitest/node';

export default class CountReporter implements Reporter {
  onTestRunEnd(testModules: ReadonlyArray<TestModule>, unhandledErrors: ReadonlyArray<unknown>): void {
    let passed = 0;
    let failed = 0;
    let skipped = 0;
    for (const testModule of testModules) {
      if (testModule.state() === 'failed' && [...testModule.children.allTests()].length === 0) failed++;
      for (const test of testModule.children.allTests()) {
        const state = test.result().state;
        if (state === 'passed') passed++;
        else if (state === 'failed') failed++;
        else skipped++;
      }
    }
    failed += unhandledErrors.length;
    if (process.env.CI === 'true' && skipped > 0) {
      process.stdout.write(`CI: ${skipped} test(s) skipped; every test must run in CI\n`);
      failed += skipped;
      process.exitCode = 1;
    }
    process.stdout.write(`${passed} passed, ${failed} failed, ${skipped} skipped\n`);
  }
}
