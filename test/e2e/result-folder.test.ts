/**
 * The result folder under faults, through the built CLI as separate processes (node bin/piezomap.js), as a user meets
 * them (issue 9, items 5-8):
 * - SIGKILL (and some SIGINT) at seeded random instants of `solve --overwrite`, most of them while it writes: after
 *   every signal the folder holds a complete set (every file summary.json lists is there and belongs to the run it
 *   describes, nothing else but piezomap's recognised leftovers) or a commit in progress that the next run finishes;
 *   after SIGINT nothing of the run's own is left and its message matches what is there; the next run cleans up and
 *   says so;
 * - two runs into one folder at once: the second is refused naming the first; after the first is killed its stale
 *   lock is taken over with a note;
 * - a folder holding the run's inputs is refused and the inputs stay byte for byte.
 * The invariant is common practice for atomic replacement (stage completely, switch by rename).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, watch, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { seededUniform } from '../../src/random.js';
import { COMMIT_FOLDER, LOCK_FILE, STAGING_FOLDER } from '../../src/output/resultFolder.js';
import { filesBelow, folderState } from '../helpers/resultSet.js';
import { testGrid } from '../helpers/model.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
/** The kill loop's time budget: enough kills to cover startup, solve, staging and commit, short enough for the suite. */
const LOOP_SECONDS = Number(process.env.KILL_LOOP_SECONDS ?? 22);
const SEED = Number(process.env.KILL_LOOP_SEED ?? 20260901);

let dir: string;
const scenario = (run: 'A' | 'B') => join(dir, 'inputs', `${run}.json`);
const ref = (run: 'A' | 'B') => join(dir, `ref-${run}`);

interface Run {
  code: number | null;
  signal: NodeJS.Signals | null;
  stdout: string;
  stderr: string;
  seconds: number;
  pid: number;
}

/** Start the CLI; `kill(child)` may arm a signal. */
function cli(args: string[], arm?: (child: ReturnType<typeof spawn>) => void): Promise<Run> {
  return new Promise((done) => {
    const t0 = performance.now();
    const child = spawn(process.execPath, [BIN, ...args], { env: { ...process.env, FORCE_COLOR: '0' } });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d) => (stdout += d));
    child.stderr.on('data', (d) => (stderr += d));
    child.on('close', (code, signal) => done({ code, signal, stdout, stderr, seconds: (performance.now() - t0) / 1000, pid: child.pid! }));
    arm?.(child);
  });
}

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'piezomap-folder-e2e-'));
  mkdirSync(join(dir, 'inputs'));
  const n = 60;
  writeFileSync(join(dir, 'inputs', 'k.tif'), encodeFloat32GeoTiff(testGrid(n, n, 10), new Float64Array(n * n).fill(3)));
  // Two runs whose every result file differs: other fixed heads, other titles.
  for (const [run, west] of [
    ['A', 20],
    ['B', 26],
  ] as const) {
    writeFileSync(
      scenario(run),
      JSON.stringify({
        title: `run ${run}`,
        aquifer: { conductivity: 'k.tif', thickness: 10 },
        fixedHeads: [
          { edge: 'west', head: west },
          { edge: 'east', head: 10 },
        ],
        recharge: 0.001,
      }),
    );
  }
  for (const run of ['A', 'B'] as const) {
    const r = await cli(['solve', scenario(run), '-o', ref(run), '--quiet']);
    expect(r.code, r.stderr).toBe(0);
  }
}, 120_000);
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** summary.json and report.html carry timings; every other file of a run is the same byte for byte on every run. */
function belongs(name: string, bytes: Buffer, run: string): boolean {
  const other = run === 'A' ? 'B' : 'A';
  if (name === 'summary.json' || name === 'report.html') {
    const text = bytes.toString();
    return text.includes(`run ${run}`) && !text.includes(`run ${other}`);
  }
  const expected = join(ref(run as 'A' | 'B'), name);
  return existsSync(expected) && bytes.equals(readFileSync(expected));
}
const runOf = (summary: Record<string, unknown>) =>
  summary.title === 'run A' ? 'A' : summary.title === 'run B' ? 'B' : `unknown (${String(summary.title)})`;
const stateOf = (out: string) => folderState(out, runOf, belongs);

/**
 * Arm `onWrite` for the moment the run starts writing into `out`: the first entry it creates there that is not its
 * lock (the staging folder; any temporary file of a writer that has none). The time from spawn is passed on.
 */
function onFirstWrite(out: string, child: ReturnType<typeof spawn>, onWrite: () => void): void {
  let fired = false;
  const watcher = watch(out, (_event, name) => {
    if (fired || !name || name.startsWith(LOCK_FILE) || !existsSync(join(out, name))) return;
    fired = true;
    onWrite();
  });
  child.on('close', () => watcher.close());
}

describe('SIGKILL and SIGINT at random instants of solve --overwrite', () => {
  it(`leaves a complete old or new set (or a commit the next run finishes) after every signal; the next run cleans up`, async () => {
    const out = join(dir, 'killed');
    // The first run measures how long a run takes, and how long from its first write to its end.
    let wroteAt = NaN;
    const t0 = performance.now();
    mkdirSync(out);
    const first = await cli(['solve', scenario('A'), '-o', out, '--quiet'], (child) =>
      onFirstWrite(out, child, () => (wroteAt = performance.now())),
    );
    expect(first.code, first.stderr).toBe(0);
    const typicalMs = first.seconds * 1000;
    const writingMs = Number.isFinite(wroteAt) ? Math.max(5, first.seconds * 1000 - (wroteAt - t0)) : 100;
    const random = seededUniform(SEED);
    const tally = { signals: 0, sigint: 0, finishedFirst: 0, old: 0, new: 0, inProgress: 0, lockLeft: 0, stagingLeft: 0, notesSeen: 0 };
    let last: 'A' | 'B' = 'A';
    const start = performance.now();
    // Until the time budget is spent, and at least until four signals landed, one of them before the new results were
    // in place (on a loaded machine a run takes seconds, so the budget alone may buy few kills); capped.
    const more = (i: number) => {
      const seconds = (performance.now() - start) / 1000;
      return i < 60 && seconds < 150 && (seconds < LOOP_SECONDS || tally.signals < 4 || tally.old === 0);
    };
    for (let i = 0; more(i); i++) {
      const run: 'A' | 'B' = last === 'A' ? 'B' : 'A';
      const signal: NodeJS.Signals = random() < 0.25 ? 'SIGINT' : 'SIGKILL';
      // A third of the signals anywhere in the run; the others after the run began writing, within 1.2 times the time
      // writing took in the first run (the instants where old and new results could mix).
      const anywhere = random() < 1 / 3;
      const hiddenBefore = filesBelow(out).filter((f) => f.startsWith('.'));
      const delayMs = anywhere ? random() * typicalMs * 1.1 : random() * writingMs * 1.2;
      const r = await cli(['solve', scenario(run), '-o', out, '--overwrite', '--quiet'], (child) => {
        const send = () => setTimeout(() => child.kill(signal), delayMs);
        if (anywhere) send();
        else onFirstWrite(out, child, send);
      });
      const what = `signal ${i} (${signal}, ${anywhere ? 'anywhere' : 'after writing began'}, ${delayMs.toFixed(0)} ms)`;
      if (r.stderr.includes('piezomap: note:')) tally.notesSeen++;
      const state = (() => {
        try {
          return stateOf(out);
        } catch (error) {
          throw new Error(`${what}: ${(error as Error).message}`);
        }
      })();
      expect(state.kind, what).not.toBe('empty');
      if (r.signal === 'SIGKILL') tally.signals++;
      else if (r.signal === 'SIGINT') {
        // SIGINT before piezomap installed its handlers (Node still starting: the run never began) or after they were
        // gone (the process already exiting: the run was done). Either way nothing of the run's own is left.
        tally.signals++;
        tally.sigint++;
        const hiddenAfter = filesBelow(out).filter((f) => f.startsWith('.'));
        expect(
          hiddenAfter.filter((f) => !hiddenBefore.includes(f)),
          what,
        ).toEqual([]);
      } else if (r.code === 130) {
        tally.signals++;
        tally.sigint++;
        // A signal the process answers leaves nothing of its own behind (what an earlier kill left may remain, when the
        // signal came before this run reached the folder), and its message matches what is there.
        const hiddenAfter = filesBelow(out).filter((f) => f.startsWith('.'));
        expect(
          hiddenAfter.filter((f) => !hiddenBefore.includes(f)),
          what,
        ).toEqual([]);
        if (existsSync(join(out, LOCK_FILE))) expect(JSON.parse(readFileSync(join(out, LOCK_FILE), 'utf8')).pid, what).not.toBe(r.pid);
        if (/no result files were completed/.test(r.stderr))
          expect(state.kind === 'complete' && state.run === run, `${what}: ${r.stderr}`).toBe(false);
        else expect(r.stderr, what).toMatch(/were complete before it/);
      } else {
        tally.finishedFirst++;
        expect(r.code, r.stderr).toBe(0);
      }
      if (state.kind === 'complete') {
        if (state.run === run) tally.new++;
        else tally.old++;
        last = state.run as 'A' | 'B';
      } else tally.inProgress++;
      // A commit left behind (a kill after its commit point) is finished first by the next run, so its run is the old
      // set the next run replaces; the next run then uses the other scenario, which keeps the two apart.
      const pending = join(out, COMMIT_FOLDER, 'summary.json');
      if (existsSync(pending)) last = runOf(JSON.parse(readFileSync(pending, 'utf8'))) as 'A' | 'B';
      if (existsSync(join(out, LOCK_FILE))) tally.lockLeft++;
      if (existsSync(join(out, STAGING_FOLDER)) || existsSync(join(out, COMMIT_FOLDER))) tally.stagingLeft++;
    }
    // The next run, uninterrupted, finds whatever the last kill left, cleans it up and says so.
    const leftovers = filesBelow(out).filter((f) => f.startsWith('.'));
    const final = await cli(['solve', scenario('A'), '-o', out, '--overwrite']);
    expect(final.code, final.stderr).toBe(0);
    expect(stateOf(out)).toMatchObject({ kind: 'complete', run: 'A' });
    expect(filesBelow(out).filter((f) => f.startsWith('.'))).toEqual([]);
    if (leftovers.some((f) => f !== LOCK_FILE)) {
      expect(final.stderr).toMatch(/piezomap: note: (removed \d+ leftover|the results of an earlier run)/);
      const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8')) as { warnings: string[] };
      expect(summary.warnings.join('\n')).toMatch(/leftover temporary|were completed from its staged copy/);
    }
    if (leftovers.includes(LOCK_FILE)) expect(final.stderr).toMatch(/took over the stale lock of an earlier run/);
    console.log(
      `signal loop (seed ${SEED}, ${((performance.now() - start) / 1000).toFixed(1)} s, run ${typicalMs.toFixed(0)} ms, writing ${writingMs.toFixed(0)} ms): ${JSON.stringify(tally)}`,
    );
    expect(tally.signals).toBeGreaterThanOrEqual(4);
    // Signals landed before the new results were in place.
    expect(tally.old).toBeGreaterThan(0);
  }, 240_000);
});

describe('two runs into one folder at once', () => {
  it("refuses the second naming the first; a killed holder's stale lock is taken over with a note", async () => {
    // A solve that runs for minutes (Jacobi on 300 x 300 cells to 1e-14), as in interrupt.test.ts.
    const slowDir = join(dir, 'slow');
    mkdirSync(slowDir);
    const n = 300;
    writeFileSync(join(slowDir, 'k.tif'), encodeFloat32GeoTiff(testGrid(n, n, 10), new Float64Array(n * n).fill(3)));
    writeFileSync(
      join(slowDir, 'slow.json'),
      JSON.stringify({
        title: 'slow',
        aquifer: { conductivity: 'k.tif', thickness: 10 },
        fixedHeads: [
          { edge: 'west', head: 20 },
          { edge: 'east', head: 10 },
        ],
        solver: { method: 'jacobi', tolerance: 1e-14, maxIterations: 100000000 },
      }),
    );
    const out = join(dir, 'shared');
    let holder: ReturnType<typeof spawn> | undefined;
    const slow = cli(['solve', join(slowDir, 'slow.json'), '-o', out, '--quiet'], (child) => (holder = child));
    for (let i = 0; i < 600 && !existsSync(join(out, LOCK_FILE)); i++) await new Promise((r) => setTimeout(r, 50));
    expect(existsSync(join(out, LOCK_FILE)), 'the first run took the lock').toBe(true);
    const second = await cli(['solve', scenario('A'), '-o', out, '--quiet']);
    expect(second.code, second.stderr).toBe(2);
    expect(second.stderr).toMatch(new RegExp(`output folder .*shared is in use by another piezomap run \\(PID ${holder!.pid} on host `));
    expect(second.stderr).not.toMatch(/\n\s+at /);
    holder!.kill('SIGKILL');
    expect((await slow).signal).toBe('SIGKILL');
    // The killed run's lock stays behind; the next run sees its holder is gone, takes over and says so.
    expect(existsSync(join(out, LOCK_FILE))).toBe(true);
    const third = await cli(['solve', scenario('A'), '-o', out]);
    expect(third.code, third.stderr).toBe(0);
    expect(third.stderr).toMatch(
      new RegExp(`note: took over the stale lock of an earlier run into .*shared \\(PID ${holder!.pid} on host .*no longer running\\)`),
    );
    const summary = JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8')) as { warnings: string[] };
    expect(summary.warnings.join('\n')).toMatch(new RegExp(`stale lock .*PID ${holder!.pid}`));
    expect(stateOf(out)).toMatchObject({ kind: 'complete', run: 'A' });
    expect(existsSync(join(out, LOCK_FILE))).toBe(false);
  }, 180_000);
});

describe('a result folder holding the inputs', () => {
  it("refuses -o set to the scenario's own folder, naming the input, and leaves every input byte for byte", async () => {
    const own = join(dir, 'own');
    mkdirSync(own);
    const n = 20;
    const headBytes = encodeFloat32GeoTiff(
      testGrid(n, n, 10),
      new Float64Array(n * n).map((_, p) => (p % n === 0 ? 20 : Number.NaN)),
    );
    writeFileSync(join(own, 'k.tif'), encodeFloat32GeoTiff(testGrid(n, n, 10), new Float64Array(n * n).fill(3)));
    writeFileSync(join(own, 'head.tif'), headBytes);
    writeFileSync(
      join(own, 's.json'),
      JSON.stringify({
        title: 'own',
        aquifer: { conductivity: 'k.tif', thickness: 10 },
        fixedHeads: [{ raster: 'head.tif' }, { edge: 'east', head: 10 }],
      }),
    );
    const before = filesBelow(own).map((f) => [f, readFileSync(join(own, f))] as const);
    for (const flags of [[], ['--overwrite']]) {
      const r = await cli(['solve', join(own, 's.json'), '-o', own, '--quiet', ...flags]);
      expect(r.code, r.stderr).toBe(2);
      expect(r.stderr).toMatch(/output folder .*own holds 3 inputs of this run \(.*s\.json, .*k\.tif, .*head\.tif\)/);
      expect(filesBelow(own)).toEqual(before.map(([f]) => f));
      for (const [f, bytes] of before) expect(readFileSync(join(own, f)).equals(bytes), f).toBe(true);
    }
    // A sub-folder of the scenario's folder is fine.
    const r = await cli(['solve', join(own, 's.json'), '-o', join(own, 'results'), '--quiet']);
    expect(r.code, r.stderr).toBe(0);
    expect(readFileSync(join(own, 'head.tif')).equals(headBytes)).toBe(true);
  }, 120_000);
});
