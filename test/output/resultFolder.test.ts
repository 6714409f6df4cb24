/**
 * The result folder's guarantees (src/output/resultFolder.ts), file-system level:
 * - the commit protocol, interrupted after every single step it takes (each step is one system call, so this is
 *   every state a SIGKILL can leave), keeps the folder a complete old set, a complete new set, or a recognised commit
 *   in progress, and the next run finishes it into the complete new set (item 7 of issue 9);
 * - leftovers of interrupted runs are removed by the next run, which says so (item 8);
 * - a folder holding an input of the run is refused naming it, also through a symbolic link (item 5);
 * - a folder locked by a running process is refused naming it; a stale lock is taken over with a note (item 6).
 * The invariant follows common practice for atomic replacement (stage completely, switch by rename); no outside
 * reference computes these states.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, symlinkSync, utimesSync, writeFileSync } from 'node:fs';
import { hostname, tmpdir } from 'node:os';
import { join } from 'node:path';
import {
  applyCommit,
  COMMIT_FOLDER,
  LOCK_FILE,
  prepareResultFolder,
  releaseResultFolder,
  stageResultFiles,
  STAGING_FOLDER,
  writeResultFiles,
  type OutputFile,
} from '../../src/output/resultFolder.js';
import { filesBelow, folderState } from '../helpers/resultSet.js';

let root: string;
beforeAll(() => {
  root = mkdtempSync(join(tmpdir(), 'piezomap-folder-'));
});
afterAll(() => rmSync(root, { recursive: true, force: true }));

let counter = 0;
const freshDir = () => join(root, `case-${counter++}`);

/** A result set as compare writes one: top-level files and summary, sub-folders with their own summaries. */
function resultSet(run: string, names: string[]): OutputFile[] {
  const files: OutputFile[] = names.map((name) => ({ name, bytes: `${run}:${name}\n` }));
  const folders = [...new Set(names.filter((n) => n.includes('/')).map((n) => n.split('/')[0]!))];
  for (const f of folders) {
    const own = names.filter((n) => n.startsWith(`${f}/`)).map((n) => n.slice(f.length + 1));
    files.push({ name: `${f}/summary.json`, bytes: JSON.stringify({ run, files: [...own, 'summary.json'] }) });
  }
  const all = [...files.map((f) => f.name), 'summary.json'];
  files.push({ name: 'summary.json', bytes: JSON.stringify({ run, files: all }) });
  return files;
}

const OLD = resultSet('old', ['head.tif', 'budget.csv', 'head-map.png', 'a/head.tif', 'gone/head.tif']);
const NEW = resultSet('new', ['head.tif', 'budget.csv', 'report.html', 'a/head.tif', 'a/drawdown.tif', 'fresh/head.tif']);

const state = (dir: string) =>
  folderState(
    dir,
    (s) => String(s.run),
    (name, bytes, run) =>
      name.endsWith('summary.json') ? JSON.parse(bytes.toString()).run === run : bytes.toString() === `${run}:${name}\n`,
  );

async function withOldSet(): Promise<string> {
  const dir = freshDir();
  await writeResultFiles(dir, OLD);
  expect(state(dir)).toMatchObject({ kind: 'complete', run: 'old' });
  return dir;
}

describe('replacing results (--overwrite), cut short after every step', () => {
  it('every state is the complete old set, the complete new set or a commit in progress; the next run finishes it', async () => {
    const seen = { old: 0, new: 0, inProgress: 0 };
    let total = -1;
    for (let k = 0; total < 0 || k <= total; k++) {
      const dir = await withOldSet();
      const folder = await prepareResultFolder(dir, true);
      await stageResultFiles(folder, NEW);
      const steps = applyCommit(dir, k);
      if (steps < k || !existsSync(join(dir, COMMIT_FOLDER))) total = steps;
      const s = state(dir);
      if (s.kind === 'complete') seen[s.run as 'old' | 'new']++;
      else if (s.kind === 'in-progress') seen.inProgress++;
      else throw new Error(`empty folder after ${k} steps`);
      // The killed run leaves its lock; here the same process plays the next run, so the lock is released first.
      releaseResultFolder(dir);
      const next = await prepareResultFolder(dir, true);
      expect(state(dir), `after ${k} steps, then recovery`).toMatchObject({ kind: 'complete', run: 'new' });
      expect(existsSync(join(dir, COMMIT_FOLDER))).toBe(false);
      if (k < total) expect(next.notes.join('\n')).toMatch(/were interrupted while being put in place; .* completed from its staged copy/);
      releaseResultFolder(dir);
      expect(filesBelow(dir).filter((f) => f.startsWith('.'))).toEqual([]);
    }
    // The protocol has steps of each kind: old summaries removed, old files removed, new files renamed in, cleanup.
    expect(total).toBeGreaterThan(12);
    expect(seen.old).toBeGreaterThan(0);
    expect(seen.new).toBeGreaterThan(0);
    expect(seen.inProgress).toBeGreaterThan(0);
  });

  it('a run killed while staging leaves the old set complete; the next run removes the staging folder and says so', async () => {
    const dir = await withOldSet();
    // What a kill during staging leaves: a partial staging folder.
    mkdirSync(join(dir, STAGING_FOLDER, 'a'), { recursive: true });
    writeFileSync(join(dir, STAGING_FOLDER, 'head.tif'), 'new:head.tif\n');
    writeFileSync(join(dir, STAGING_FOLDER, 'a', 'head.tif'), 'new:a/head.tif\n');
    expect(state(dir)).toMatchObject({ kind: 'complete', run: 'old' });
    const folder = await prepareResultFolder(dir, true);
    expect(folder.notes.join('\n')).toMatch(
      /removed 1 leftover temporary file\(s\) or folder\(s\) of an interrupted earlier run .*\.piezomap-staging/,
    );
    expect(existsSync(join(dir, STAGING_FOLDER))).toBe(false);
    expect(state(dir)).toMatchObject({ kind: 'complete', run: 'old' });
    await writeResultFiles(folder, NEW);
    expect(state(dir)).toMatchObject({ kind: 'complete', run: 'new' });
    expect(existsSync(join(dir, LOCK_FILE))).toBe(false);
  });

  it('temporary files of earlier versions (.piezomap-tmp-*) are removed by the next run, which says so', async () => {
    const dir = await withOldSet();
    writeFileSync(join(dir, '.piezomap-tmp-4242-0'), Buffer.alloc(3000));
    writeFileSync(join(dir, 'a', '.piezomap-tmp-4242-1'), Buffer.alloc(1000));
    writeFileSync(join(dir, '.hidden-note-of-the-user'), 'mine\n');
    const folder = await prepareResultFolder(dir, true);
    expect(folder.notes.join('\n')).toMatch(
      /removed 2 leftover temporary file\(s\).*\(3\.9 KiB: \.piezomap-tmp-4242-0, a\/\.piezomap-tmp-4242-1\)/,
    );
    expect(existsSync(join(dir, '.piezomap-tmp-4242-0'))).toBe(false);
    expect(existsSync(join(dir, 'a', '.piezomap-tmp-4242-1'))).toBe(false);
    // Only piezomap's own names are touched.
    expect(readFileSync(join(dir, '.hidden-note-of-the-user'), 'utf8')).toBe('mine\n');
    releaseResultFolder(dir);
  });

  it('a commit folder damaged from outside (no readable manifest) is refused naming it, not guessed at', async () => {
    const dir = await withOldSet();
    mkdirSync(join(dir, COMMIT_FOLDER));
    writeFileSync(join(dir, COMMIT_FOLDER, '.piezomap-manifest.json'), '{"files": [');
    await expect(prepareResultFolder(dir, true)).rejects.toThrow(/interrupted results of an earlier run that cannot be completed/);
    expect(existsSync(join(dir, LOCK_FILE))).toBe(false);
    expect(state(dir)).toMatchObject({ kind: 'complete', run: 'old' });
  });

  it("a file at a result name that no earlier summary lists is the user's: refused, never replaced", async () => {
    const dir = freshDir();
    mkdirSync(dir);
    writeFileSync(join(dir, 'head-map.png'), 'the user drew this\n');
    await expect(writeResultFiles(dir, resultSet('new', ['head.tif', 'head-map.png']))).rejects.toThrow(
      /already holds head-map\.png, which no earlier piezomap run there lists/,
    );
    expect(readFileSync(join(dir, 'head-map.png'), 'utf8')).toBe('the user drew this\n');
    expect(filesBelow(dir)).toEqual(['head-map.png']);
  });
});

describe('a result folder holding inputs of the run', () => {
  it('is refused naming the input, before anything is written', async () => {
    const dir = freshDir();
    mkdirSync(dir);
    writeFileSync(join(dir, 'head.tif'), 'fixed heads of the user\n');
    await expect(prepareResultFolder(dir, true, [join(root, 'elsewhere.json'), join(dir, 'head.tif')])).rejects.toThrow(
      /holds an input of this run \(.*head\.tif\)/,
    );
    expect(filesBelow(dir)).toEqual(['head.tif']);
    // Deeper in the folder counts as well.
    mkdirSync(join(dir, 'baseline'));
    writeFileSync(join(dir, 'baseline', 'k.tif'), 'k\n');
    await expect(prepareResultFolder(dir, true, [join(dir, 'baseline', 'k.tif')])).rejects.toThrow(/baseline\/k\.tif/);
  });

  it('is refused also when the folder or the input is reached through a symbolic link', async () => {
    const real = freshDir();
    mkdirSync(real);
    writeFileSync(join(real, 'k.tif'), 'k\n');
    const alias = join(root, `alias-${counter++}`);
    symlinkSync(real, alias);
    await expect(prepareResultFolder(alias, false, [join(real, 'k.tif')])).rejects.toThrow(/holds an input/);
    await expect(prepareResultFolder(real, false, [join(alias, 'k.tif')])).rejects.toThrow(/holds an input/);
    // A folder beside the inputs is fine.
    const beside = await prepareResultFolder(join(root, `beside-${counter++}`), false, [join(real, 'k.tif')]);
    releaseResultFolder(beside.dir);
  });
});

describe('the lock of a result folder', () => {
  const lockOf = (pid: number, host = hostname(), acquired = new Date().toISOString()) =>
    JSON.stringify({ pid, host, started: acquired, acquired, command: 'piezomap solve x.json' });

  it('is held while the folder is prepared, holds PID, host and start time, and is gone after writing', async () => {
    const dir = freshDir();
    const folder = await prepareResultFolder(dir, false);
    const lock = JSON.parse(readFileSync(join(dir, LOCK_FILE), 'utf8'));
    expect(lock).toMatchObject({ pid: process.pid, host: hostname() });
    expect(Date.parse(lock.started)).toBeLessThanOrEqual(Date.now());
    await writeResultFiles(folder, resultSet('new', ['head.tif']));
    expect(existsSync(join(dir, LOCK_FILE))).toBe(false);
  });

  it('refuses a folder whose lock holder runs, naming PID and host', async () => {
    const dir = freshDir();
    mkdirSync(dir);
    const sleeper = spawn(process.execPath, ['-e', 'setTimeout(() => {}, 60000)']);
    await new Promise((started) => sleeper.once('spawn', started));
    try {
      writeFileSync(join(dir, LOCK_FILE), lockOf(sleeper.pid!));
      await expect(prepareResultFolder(dir, false)).rejects.toThrow(
        new RegExp(`in use by another piezomap run \\(PID ${sleeper.pid} on host ${hostname()}`),
      );
      // The holder's lock is left as it was.
      expect(JSON.parse(readFileSync(join(dir, LOCK_FILE), 'utf8')).pid).toBe(sleeper.pid);
    } finally {
      sleeper.kill('SIGKILL');
    }
  });

  it('refuses a lock of another host (it cannot be checked from here)', async () => {
    const dir = freshDir();
    mkdirSync(dir);
    writeFileSync(join(dir, LOCK_FILE), lockOf(1, 'some-other-host.invalid'));
    await expect(prepareResultFolder(dir, false)).rejects.toThrow(
      /in use by another piezomap run \(PID 1 on host some-other-host\.invalid/,
    );
  });

  it('takes over a lock whose PID now belongs to a process started after the lock was taken (Linux /proc)', async () => {
    if (!existsSync('/proc/self/stat')) return;
    const dir = freshDir();
    mkdirSync(dir);
    const sleeper = spawn(process.execPath, ['-e', 'setTimeout(() => {}, 60000)']);
    try {
      // The lock claims to be an hour old; the process now holding its PID has just started.
      writeFileSync(join(dir, LOCK_FILE), lockOf(sleeper.pid!, hostname(), new Date(Date.now() - 3600_000).toISOString()));
      const folder = await prepareResultFolder(dir, false);
      expect(folder.notes.join('\n')).toMatch(
        new RegExp(`took over the stale lock .*PID ${sleeper.pid} .*its PID now belongs to a process started later`),
      );
      releaseResultFolder(dir);
    } finally {
      sleeper.kill('SIGKILL');
    }
  });

  it('takes an unreadable lock for one being written while it is young, and for a damaged one when old', async () => {
    const dir = freshDir();
    mkdirSync(dir);
    writeFileSync(join(dir, LOCK_FILE), '');
    await expect(prepareResultFolder(dir, false)).rejects.toThrow(/in use by another piezomap run \(its lock file .* is being written\)/);
    const minuteAgo = new Date(Date.now() - 60_000);
    utimesSync(join(dir, LOCK_FILE), minuteAgo, minuteAgo);
    const folder = await prepareResultFolder(dir, false);
    expect(folder.notes.join('\n')).toMatch(/a damaged lock file in .* was replaced/);
    releaseResultFolder(dir);
  });

  it('takes over a stale lock (holder no longer running on this host) and says so', async () => {
    const dir = freshDir();
    mkdirSync(dir);
    // A PID that has just ended.
    const gone = spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))'], { encoding: 'utf8' });
    const pid = Number(gone.stdout);
    writeFileSync(join(dir, LOCK_FILE), lockOf(pid));
    const folder = await prepareResultFolder(dir, false);
    expect(folder.notes.join('\n')).toMatch(
      new RegExp(`took over the stale lock of an earlier run .*PID ${pid} on host ${hostname()}.*no longer running`),
    );
    expect(JSON.parse(readFileSync(join(dir, LOCK_FILE), 'utf8')).pid).toBe(process.pid);
    releaseResultFolder(dir);
    expect(filesBelow(dir)).toEqual([]);
  });
});
