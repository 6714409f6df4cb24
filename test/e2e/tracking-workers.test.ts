/**
 * `piezomap solve` and `compare` run particle tracking with its long part (a track from every active cell) in worker threads, so
 * that Ctrl-C is answered at once (src/pipeline.ts solveModelWith, src/compare/run.ts compareModelsWith,
 * src/analysis/tracking/run.ts trackSolutionInWorkers). The result must be the one the library computes in one thread, value for value; the
 * one-thread tracking is itself checked against the travel-time areas Q t / (n b) in test/analysis/tracking/.
 * Workers exist only compiled, so this uses the built modules (npm test builds first).
 */
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

const dist = (path: string) => new URL(`../../dist/src/${path}`, import.meta.url);
const compiled = existsSync(fileURLToPath(dist('analysis/tracking/trackingWorker.js')));
const demo = fileURLToPath(new URL('../../data/valley.json', import.meta.url));

describe.skipIf(!compiled)('tracking in worker threads', () => {
  it('gives the demo its capture zones, pathlines, point tracks and warnings exactly as in one thread', async () => {
    const pipeline = (await import(dist('pipeline.js').href)) as typeof import('../../src/pipeline.js');
    const worker = (await import(dist('executor/worker.js').href)) as typeof import('../../src/executor/worker.js');
    const inline = await pipeline.solveScenarioFile(demo);
    const threaded = await pipeline.solveScenarioFile(demo, {}, worker.workerExecutor);
    expect(inline.tracking).toBeTruthy();
    const { seconds: _a, ...one } = inline.tracking!;
    const { seconds: _b, ...many } = threaded.tracking!;
    expect(many).toEqual(one);
    expect(threaded.warnings).toEqual(inline.warnings);
    expect(threaded.timings.tracking).toBeGreaterThan(0);
  }, 120_000);

  it('gives compare the same tracking and capture-zone changes per variant as in one thread', async () => {
    const compare = (await import(dist('compare/run.js').href)) as typeof import('../../src/compare/run.js');
    const worker = (await import(dist('executor/worker.js').href)) as typeof import('../../src/executor/worker.js');
    const inline = await compare.compareScenario(demo);
    const threaded = await compare.compareScenario(demo, {}, worker.workerExecutor);
    const strip = (t: { seconds: number } | undefined) => {
      const { seconds: _s, ...rest } = t!;
      return rest;
    };
    expect(strip(threaded.baseline.tracking)).toEqual(strip(inline.baseline.tracking));
    expect(inline.variants.length).toBeGreaterThan(0);
    inline.variants.forEach((v, k) => {
      const t = threaded.variants[k]!;
      expect(v.capture).toBeTruthy();
      expect(t.capture).toEqual(v.capture);
      expect(strip(t.result.tracking)).toEqual(strip(v.result.tracking));
      expect(t.result.warnings).toEqual(v.result.warnings);
    });
  }, 180_000);
});
