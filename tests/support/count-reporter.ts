// Ends the run with the plain line `N passed, N failed, N skipped`, which CI reads.
// A file that failed outside its tests (an import, a beforeAll: its browser or broker missing) counts its
// tests that did not pass as failed, everywhere: a suite that could not set up did not pass.
// A test that is skipped while CI=true counts as failed: CI must not pass on tests it did not run.
import type { Reporter, TestModule } from 'vitest/node';

export default class CountReporter implements Reporter {
  onTestRunEnd(testModules: ReadonlyArray<TestModule>, unhandledErrors: ReadonlyArray<unknown>): void {
    let passed = 0;
    let failed = 0;
    let skipped = 0;
    for (const testModule of testModules) {
      const tests = [...testModule.children.allTests()];
      const states = tests.map((test) => test.result().state);
      const setupFailed = testModule.state() === 'failed' && !states.includes('failed');
      if (setupFailed) {
        const notPassed = states.filter((state) => state !== 'passed').length;
        passed += states.length - notPassed;
        failed += Math.max(1, notPassed);
        continue;
      }
      for (const state of states) {
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
