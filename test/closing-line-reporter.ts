import type { Reporter, TestModule } from 'vitest/node';

/**
 * Prints one plain closing line, `Tests: N passed, N failed, N skipped`, after vitest's own summary, so that
 * tools reading only the last line of a run (CI) see the counts.
 */
export default class ClosingLineReporter implements Reporter {
  onTestRunEnd(testModules: ReadonlyArray<TestModule>): void {
    let passed = 0;
    let failed = 0;
    let skipped = 0;
    for (const module of testModules) {
      for (const test of module.children.allTests()) {
        const state = test.result().state;
        if (state === 'passed') passed++;
        else if (state === 'failed') failed++;
        else skipped++;
      }
      // A file that failed to load has no tests to count but is a failure all the same.
      if (module.state() === 'failed' && [...module.children.allTests()].length === 0) failed++;
    }
    process.stdout.write(`\nTests: ${passed} passed, ${failed} failed${skipped ? `, ${skipped} skipped` : ''}\n`);
  }
}
