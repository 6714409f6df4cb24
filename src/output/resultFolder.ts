/**
 * The result folder: the only place piezomap writes. Four guarantees, each enforced here (callers only prepare the
 * folder, then hand over the complete set of files):
 *
 * 1. No input is ever written over. A folder that holds any file the run read (scenario, rasters, CSV, GeoJSON, of
 *    the baseline and of every variant) is refused, naming the file, before the long work starts.
 * 2. One run per folder at a time. The folder is locked by `.piezomap-lock`, created atomically (a complete file
 *    linked into place, so it never exists half-written) and holding the holder's PID, host and start time. A second
 *    run is refused naming the holder. A lock whose holder is gone (same host, PID not running) is stale: it is taken
 *    over with a warning. Locks of other hosts cannot be checked and are never taken over.
 * 3. Old and new results never mix, even after SIGKILL at any instant. The commit protocol is below.
 * 4. Leftovers of an interrupted run (staging folders, a half-applied commit, temporary files of earlier versions) are
 *    recognised by name, cleaned up by the next run that holds the lock, and reported as a warning.
 *
 * Commit protocol (replacing the results of a folder; the layout of OUTDIR is the contract's, flat, so the set cannot
 * be swapped by one rename; the top-level summary.json is the certificate of a complete set instead):
 *
 *   a. Stage: every new file is written into OUTDIR/.piezomap-staging/ (same relative paths), then a manifest listing
 *      the new files and the old files to remove (those the current summary.json lists and the new set does not).
 *      A kill here leaves the old set untouched plus a staging folder: the next run deletes it (roll back).
 *   b. Commit point: one rename, .piezomap-staging -> .piezomap-commit. From here the next run rolls forward.
 *   c. Apply, in this order, each step one system call, all in one synchronous block (so SIGINT and SIGTERM, answered
 *      on the event loop, land before b or after e, never inside):
 *        1. remove the old summary.json files, top level first (from now on no certificate: the folder claims nothing);
 *        2. remove old files the new set does not have, then their folders if empty;
 *        3. rename every new data file into place (replacing an old file of the same name);
 *        4. rename the new summary.json of sub-folders (compare's baseline/ and NAME/), then the top-level one:
 *           the certificate appears only when every file it lists is in place.
 *   d. Remove .piezomap-commit (only the manifest is left in it).
 *   Every step is idempotent given the manifest and what is still inside .piezomap-commit, so a kill between any two
 *   steps leaves: the complete old set (before c1), an incomplete set without top-level summary.json beside a
 *   .piezomap-commit folder (during c1-c4, a window of microseconds to milliseconds), or the complete new set. The next
 *   run into the folder completes the commit before anything else. Whoever reads the folder can rely on this: if
 *   summary.json is there, every file it lists is there and belongs to the same run.
 *   No fsync: the protocol guards against the process dying, not against the machine losing power.
 */
import { constants } from 'node:fs';
import { access, mkdir, readdir, readFile, stat, writeFile } from 'node:fs/promises';
import {
  existsSync,
  linkSync,
  lstatSync,
  mkdirSync,
  readdirSync,
  readFileSync,
  realpathSync,
  renameSync,
  rmdirSync,
  rmSync,
  unlinkSync,
  writeFileSync,
} from 'node:fs';
import { hostname } from 'node:os';
import { basename, dirname, isAbsolute, join, normalize, relative, resolve, sep } from 'node:path';
import { PiezomapError, describeThrown, inputError } from '../errors.js';

/** Files piezomap writes into a result folder; their presence marks a folder as holding earlier results. */
export const RESULT_MARKER = 'summary.json';
/** Names piezomap keeps for itself in a result folder; no result file starts with this. */
export const RESERVED_PREFIX = '.piezomap-';
export const LOCK_FILE = '.piezomap-lock';
export const STAGING_FOLDER = '.piezomap-staging';
export const COMMIT_FOLDER = '.piezomap-commit';
const MANIFEST = '.piezomap-manifest.json';
const LOCK_TEMP_PREFIX = '.piezomap-lock-new-';
/** Temporary files of earlier versions, written beside each result file (`.piezomap-tmp-PID-N`). */
const LEGACY_TEMP_PREFIX = '.piezomap-tmp-';

export interface OutputFile {
  /** Path relative to the result folder, e.g. `head.tif` or `expanded/head.tif`. */
  name: string;
  bytes: Uint8Array | string;
}

/** A result folder this process has prepared and locked (prepareResultFolder). */
export interface ResultFolder {
  /** Absolute path. */
  dir: string;
  /** As the user gave it, for messages. */
  given: string;
  overwrite: boolean;
  /** What preparing the folder found and did (stale lock taken over, leftovers removed): warnings for the summary. */
  notes: string[];
}

interface LockInfo {
  pid: number;
  host: string;
  /** When the holding process started (ISO 8601). */
  started: string;
  /** When the lock was taken (ISO 8601). */
  acquired: string;
  command: string;
}

/** Folders this process holds the lock of, by absolute path. */
const held = new Map<string, ResultFolder>();
/** Staging folders being filled right now (removed on SIGINT/SIGTERM). */
const liveStaging = new Set<string>();
/** Folders whose new results this process has committed. */
const committed = new Set<string>();
let exitHookInstalled = false;

const processStarted = new Date(Date.now() - process.uptime() * 1000).toISOString();

/**
 * Make sure OUTDIR can take new results, before any long work: it is created when missing; a folder holding an input
 * of the run (`inputs`: absolute paths, e.g. ModelInput.inputFiles) is refused naming the file; it is locked against
 * other runs; leftovers of interrupted runs are cleaned up (`notes` says what was done); a folder holding earlier
 * results is refused unless `overwrite`. Calling it again for a folder this process holds returns the same handle.
 */
export async function prepareResultFolder(outDir: string, overwrite: boolean, inputs: readonly string[] = []): Promise<ResultFolder> {
  const dir = resolve(outDir);
  const mine = held.get(dir);
  if (mine) {
    refuseInputsInside(mine.dir, outDir, inputs);
    return mine;
  }
  let exists = false;
  try {
    const s = await stat(dir);
    if (!s.isDirectory()) throw inputError(`output path ${outDir} exists and is not a folder`);
    exists = true;
  } catch (error) {
    if (error instanceof PiezomapError) throw error;
    const code = (error as NodeJS.ErrnoException).code;
    if (code !== 'ENOENT' && code !== 'ENOTDIR') {
      throw inputError(`cannot use output folder ${outDir}: ${fileSystemReason(error)}`, { file: outDir });
    }
  }
  if (exists) refuseInputsInside(dir, outDir, inputs);
  else {
    try {
      await makeFolders(dir);
    } catch (mkdirError) {
      throw inputError(`cannot create output folder ${outDir}: ${fileSystemReason(mkdirError)}`, {
        file: outDir,
        hint: 'choose a folder you can write to with -o',
      });
    }
  }
  try {
    await access(dir, constants.W_OK);
  } catch {
    throw inputError(`output folder ${outDir} is not writable`, { file: outDir });
  }
  const folder: ResultFolder = { dir, given: outDir, overwrite, notes: [] };
  try {
    acquireLock(folder);
  } catch (error) {
    if (error instanceof PiezomapError) throw error;
    throw inputError(`cannot lock output folder ${outDir}: ${fileSystemReason(error)}`, { file: outDir });
  }
  try {
    folder.notes.push(...recoverLeftovers(dir, outDir));
    const entries = await readdir(dir);
    const hasResults = entries.includes(RESULT_MARKER) || entries.includes('baseline') || entries.includes('comparison.csv');
    if (hasResults && !overwrite) {
      throw inputError(`output folder ${outDir} already holds results`, {
        file: outDir,
        hint: 'choose another folder with -o, or pass --overwrite to replace them',
      });
    }
  } catch (error) {
    releaseResultFolder(dir);
    throw error;
  }
  return folder;
}

/**
 * Write a complete set of result files by the commit protocol above (staged, then swapped in), replacing the set the
 * folder's summary.json lists when the folder was prepared with `overwrite`. The set must hold the top-level
 * summary.json. A failure before the commit point removes the staging folder and leaves the folder as it was.
 * The folder's lock is released at the end. Returns the absolute paths written.
 */
export async function writeResultFiles(
  target: string | ResultFolder,
  files: OutputFile[],
  options: { overwrite?: boolean; inputs?: readonly string[] } = {},
): Promise<string[]> {
  const folder = typeof target === 'string' ? await prepareResultFolder(target, Boolean(options.overwrite), options.inputs ?? []) : target;
  await stageResultFiles(folder, files);
  try {
    applyCommit(folder.dir);
    committed.add(folder.dir);
  } catch (error) {
    // The commit point is passed: the next run into the folder finishes the commit.
    throw new PiezomapError('internal', `could not put the results in place in ${folder.given}: ${fileSystemReason(error)}`, {
      file: folder.given,
      hint: 'the next run into this folder completes them from the staged copy',
    });
  } finally {
    releaseResultFolder(folder.dir);
  }
  return files.map((f) => join(folder.dir, f.name));
}

/**
 * Steps a and b of the commit protocol: stage the complete new set and pass the commit point (the staging folder
 * renamed to .piezomap-commit). writeResultFiles then applies the commit; tests stop in between to play a SIGKILL.
 */
export async function stageResultFiles(folder: ResultFolder, files: OutputFile[]): Promise<void> {
  const { dir, given } = folder;
  if (!held.has(dir))
    throw new PiezomapError('internal', `result folder ${given} was not prepared (or was already written)`, { file: given });
  try {
    const names = files.map((f) => checkResultName(f.name));
    if (!names.includes(RESULT_MARKER)) throw new PiezomapError('internal', `the result set for ${given} has no ${RESULT_MARKER}`);
    if (new Set(names).size !== names.length) throw new PiezomapError('internal', `the result set for ${given} names a file twice`);
    const previous = folder.overwrite ? await previousResultFiles(dir) : [];
    // A file at a result's place that no earlier summary.json lists is not ours: never replace it.
    for (const name of names) {
      if (!previous.includes(name) && existsSync(join(dir, name))) {
        throw inputError(`output folder ${given} already holds ${name}, which no earlier piezomap run there lists as its result`, {
          file: join(given, name),
          hint: 'move that file away, or choose another folder with -o',
        });
      }
    }
    const staging = join(dir, STAGING_FOLDER);
    liveStaging.add(staging);
    rmSync(staging, { recursive: true, force: true });
    await mkdir(staging);
    for (const folder of new Set(files.map((f) => dirname(join(staging, f.name))))) await makeFolders(folder);
    // The files are written at once (the thread pool takes several); every write has ended before this goes on,
    // so that a failure's clean-up below never races a write still under way.
    const written = await Promise.allSettled(files.map((file) => writeFile(join(staging, file.name), file.bytes)));
    for (const w of written) if (w.status === 'rejected') throw w.reason;
    const manifest: Manifest = { files: names, remove: previous.filter((p) => !names.includes(p)) };
    await writeFile(join(staging, MANIFEST), JSON.stringify(manifest, null, 2) + '\n');
    // The commit point: from here the new set is complete on disk and the commit is finished (by writeResultFiles right
    // after, in the same turn of the event loop, or, after a kill, by the next run into the folder).
    renameSync(staging, join(dir, COMMIT_FOLDER));
    liveStaging.delete(staging);
  } catch (error) {
    const staging = join(dir, STAGING_FOLDER);
    if (liveStaging.delete(staging)) rmSync(staging, { recursive: true, force: true });
    releaseResultFolder(dir);
    if (error instanceof PiezomapError) throw error;
    throw new PiezomapError('internal', `could not write results into ${given}: ${fileSystemReason(error)}`, { file: given });
  }
}

interface Manifest {
  /** The new set, relative paths. */
  files: string[];
  /** Old files (listed by the earlier summary.json) the new set does not have. */
  remove: string[];
}

const isSummary = (name: string) => name === RESULT_MARKER || name.endsWith('/' + RESULT_MARKER);
/** Top-level summary last, sub-folder summaries before it (deeper first). */
const summaryOrder = (a: string, b: string) => b.split('/').length - a.split('/').length;

/**
 * Step c and d of the commit protocol for a folder holding `.piezomap-commit`: idempotent, so it also finishes a
 * commit a killed run left. `stopAfter` (for tests) stops after that many steps, as a SIGKILL there would.
 * Returns the number of steps taken.
 */
export function applyCommit(dir: string, stopAfter = Infinity): number {
  const commit = join(dir, COMMIT_FOLDER);
  let steps = 0;
  const step = (action: () => void): boolean => {
    if (steps >= stopAfter) return false;
    action();
    steps++;
    return true;
  };
  const manifestPath = join(commit, MANIFEST);
  if (!existsSync(manifestPath)) {
    // Only reachable if the folder was damaged from outside: without a manifest nothing can be completed.
    step(() => rmSync(commit, { recursive: true, force: true }));
    return steps;
  }
  const manifest = JSON.parse(readFileSync(manifestPath, 'utf8')) as Manifest;
  const files = manifest.files.map(checkResultName);
  const remove = manifest.remove.map(checkResultName);
  const pending = (name: string) => existsSync(join(commit, name));
  if (pending(RESULT_MARKER)) {
    // c1: the old certificates go first, top level first; a summary whose new version is already in place stays.
    const oldSummaries = [...files, ...remove].filter(isSummary).sort((a, b) => -summaryOrder(a, b));
    for (const name of oldSummaries) {
      if (files.includes(name) && !pending(name)) continue;
      if (!existsSync(join(dir, name))) continue;
      if (!step(() => unlinkSync(join(dir, name)))) return steps;
    }
    // c2: old files the new set does not have, then their folders when empty.
    for (const name of remove) {
      if (!existsSync(join(dir, name))) continue;
      if (!step(() => unlinkSync(join(dir, name)))) return steps;
    }
    const newFolders = new Set(files.map((f) => dirname(f)));
    const oldFolders = [...new Set(remove.map((f) => dirname(f)))].filter((f) => f !== '.' && !newFolders.has(f));
    for (const folder of oldFolders.sort((a, b) => b.length - a.length)) {
      const path = join(dir, folder);
      if (!existsSync(path) || readdirSync(path).length > 0) continue;
      if (!step(() => rmdirSync(path))) return steps;
    }
    // c3 and c4: data files, then sub-folder summaries, then the top-level summary.
    const order = [...files.filter((f) => !isSummary(f)), ...files.filter(isSummary).sort(summaryOrder)];
    for (const name of order) {
      if (!pending(name)) continue;
      const to = join(dir, name);
      if (!existsSync(dirname(to))) {
        if (!step(() => mkdirSync(dirname(to), { recursive: true }))) return steps;
      }
      if (!step(() => renameSync(join(commit, name), to))) return steps;
    }
  }
  // d: only the manifest (and emptied sub-folders) remain.
  step(() => rmSync(commit, { recursive: true, force: true }));
  return steps;
}

/**
 * Finish or undo what an interrupted run left (the caller holds the lock, so nothing of a live run is touched):
 * a commit is completed, a staging folder removed, temporary files of earlier versions removed. Returns notes.
 */
function recoverLeftovers(dir: string, given: string): string[] {
  const notes: string[] = [];
  if (existsSync(join(dir, COMMIT_FOLDER))) {
    try {
      applyCommit(dir);
    } catch (error) {
      throw inputError(
        `output folder ${given} holds the interrupted results of an earlier run that cannot be completed: ${describeThrown(error)}`,
        {
          file: join(given, COMMIT_FOLDER),
          hint: `look into ${join(given, COMMIT_FOLDER)} (the staged results and their manifest), then move it away`,
        },
      );
    }
    notes.push(
      `the results of an earlier run into ${given} were interrupted while being put in place; that run's results were completed from its staged copy`,
    );
  }
  const leftovers: string[] = [];
  if (existsSync(join(dir, STAGING_FOLDER))) leftovers.push(join(dir, STAGING_FOLDER));
  const scan = (folder: string, depth: number) => {
    let entries: import('node:fs').Dirent[];
    try {
      entries = readdirSync(folder, { withFileTypes: true });
    } catch {
      return;
    }
    for (const e of entries) {
      const path = join(folder, e.name);
      if (
        e.name.startsWith(LEGACY_TEMP_PREFIX) ||
        (depth === 0 && e.name.startsWith(LOCK_TEMP_PREFIX) && !processAlive(lockTempPid(e.name)))
      ) {
        leftovers.push(path);
      } else if (e.isDirectory() && depth === 0 && !e.name.startsWith(RESERVED_PREFIX)) scan(path, depth + 1);
    }
  };
  scan(dir, 0);
  if (leftovers.length) {
    const bytes = leftovers.reduce((sum, path) => sum + sizeOf(path), 0);
    for (const path of leftovers) rmSync(path, { recursive: true, force: true });
    const names = leftovers.map((p) => relative(dir, p).split(sep).join('/'));
    const shown = names.slice(0, 3).join(', ') + (names.length > 3 ? `, and ${names.length - 3} more` : '');
    notes.push(
      `removed ${names.length} leftover temporary file(s) or folder(s) of an interrupted earlier run from ${given} (${formatBytes(bytes)}: ${shown})`,
    );
  }
  return notes;
}

function sizeOf(path: string): number {
  try {
    const s = lstatSync(path);
    if (!s.isDirectory()) return s.size;
    return readdirSync(path).reduce((sum, name) => sum + sizeOf(join(path, name)), 0);
  } catch {
    return 0;
  }
}

function formatBytes(n: number): string {
  if (n < 1024) return `${n} bytes`;
  if (n < 1024 * 1024) return `${(n / 1024).toFixed(1)} KiB`;
  return `${(n / 1024 / 1024).toFixed(1)} MiB`;
}

/** A result name must stay inside the folder and must not take a name piezomap keeps for itself. */
function checkResultName(name: string): string {
  const clean = normalize(name).split(sep).join('/');
  if (
    typeof name !== 'string' ||
    name === '' ||
    isAbsolute(name) ||
    clean !== name ||
    clean.split('/').some((part) => part === '..' || part === '.' || part === '' || part.startsWith(RESERVED_PREFIX))
  ) {
    throw new PiezomapError('internal', `"${name}" cannot name a result file`);
  }
  return name;
}

/** Files listed by the folder's summary.json (the set an overwrite replaces); names that would leave the folder are ignored. */
export async function previousResultFiles(outDir: string): Promise<string[]> {
  try {
    const text = await readFile(join(outDir, RESULT_MARKER), 'utf8');
    const files = (JSON.parse(text) as { files?: unknown }).files;
    if (!Array.isArray(files)) return [];
    return files.filter((f): f is string => {
      if (typeof f !== 'string') return false;
      try {
        checkResultName(f);
        return true;
      } catch {
        return false;
      }
    });
  } catch {
    return [];
  }
}

// ---- inputs ----------------------------------------------------------------------------------------------------

function isInside(path: string, folder: string): boolean {
  const rel = relative(folder, path);
  return rel !== '' && !rel.startsWith('..') && !isAbsolute(rel);
}

function realOrSelf(path: string): string {
  try {
    return realpathSync(path);
  } catch {
    return path;
  }
}

/**
 * Refuse a result folder that holds an input of the run, at any depth, however reached (links resolved): results,
 * staging and the removal of earlier results could otherwise replace it.
 */
function refuseInputsInside(dir: string, given: string, inputs: readonly string[]): void {
  if (!inputs.length) return;
  const folders = [...new Set([dir, realOrSelf(dir)])];
  const inside = inputs.filter((input) => {
    const absolute = resolve(input);
    // The file itself, and the directory entry naming it (a link in the folder pointing elsewhere counts too).
    const places = [absolute, realOrSelf(absolute), join(realOrSelf(dirname(absolute)), basename(absolute))];
    return places.some((p) => folders.some((f) => isInside(p, f)));
  });
  if (!inside.length) return;
  const shown = inside.slice(0, 3).map((p) => {
    const near = relative(process.cwd(), p);
    return near && !near.startsWith('..') && !isAbsolute(near) ? near : p;
  });
  throw inputError(
    `output folder ${given} holds ${inside.length === 1 ? 'an input' : `${inside.length} inputs`} of this run (${shown.join(', ')}${inside.length > 3 ? ', ...' : ''}); results written there could replace ${inside.length === 1 ? 'it' : 'them'}`,
    { file: inside[0]!, hint: 'write the results into a folder of their own, e.g. -o results (a new sub-folder)' },
  );
}

// ---- lock ------------------------------------------------------------------------------------------------------

function lockTempPid(name: string): number {
  return Number(name.slice(LOCK_TEMP_PREFIX.length).split('-')[0]);
}

/** True when a process of this PID runs on this host (EPERM: it runs, under another user). */
function processAlive(pid: number): boolean {
  if (!Number.isInteger(pid) || pid <= 0) return false;
  try {
    process.kill(pid, 0);
    return true;
  } catch (error) {
    return (error as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/**
 * When a running process started (ms since the epoch), from Linux's /proc (start time in clock ticks since boot,
 * field 22 of /proc/PID/stat, at the usual 100 ticks per second; boot time from /proc/stat); null elsewhere.
 */
function processStartMs(pid: number): number | null {
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    // Fields after the command name (which may hold spaces and parentheses) start with field 3.
    const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    const ticks = Number(fields[22 - 3]);
    const boot = /^btime (\d+)$/m.exec(readFileSync('/proc/stat', 'utf8'));
    if (!boot || !Number.isFinite(ticks)) return null;
    return (Number(boot[1]) + ticks / 100) * 1000;
  } catch {
    return null;
  }
}

/**
 * Why a lock's holder is surely gone, or null when it may still run. Only this host's processes can be checked: the
 * PID does not run, or the process with that PID started after the lock was taken (the PID was reused, e.g. after
 * a restart of the machine).
 */
function staleReason(holder: LockInfo): string | null {
  if (holder.host !== hostname()) return null;
  if (holder.pid === process.pid) return 'no longer running';
  if (!processAlive(holder.pid)) return 'no longer running';
  const started = processStartMs(holder.pid);
  const acquired = Date.parse(holder.acquired);
  // Two seconds of slack for clock-tick rounding.
  if (started !== null && Number.isFinite(acquired) && started > acquired + 2000) return 'its PID now belongs to a process started later';
  return null;
}

/** A lock file that cannot be read is taken for one being written while it is younger than this. */
const LOCK_WRITE_GRACE_MS = 10_000;

function lockAgeMs(path: string): number {
  try {
    return Date.now() - lstatSync(path).mtimeMs;
  } catch {
    return Infinity;
  }
}

function readLock(path: string): LockInfo | null {
  try {
    const info = JSON.parse(readFileSync(path, 'utf8')) as Partial<LockInfo>;
    if (typeof info.pid !== 'number' || typeof info.host !== 'string') return null;
    return {
      pid: info.pid,
      host: info.host,
      started: String(info.started ?? '?'),
      acquired: String(info.acquired ?? '?'),
      command: String(info.command ?? ''),
    };
  } catch {
    return null;
  }
}

function describeHolder(info: LockInfo): string {
  return `PID ${info.pid} on host ${info.host}, locked since ${info.acquired}`;
}

/**
 * Take the folder's lock or throw naming the holder. The lock file appears complete in one step (written under a
 * temporary name, then hard-linked to `.piezomap-lock`, which fails when it exists). A stale lock (holder not running on
 * this host) is moved aside by one rename and checked to be the one judged stale before a new lock is linked.
 */
function acquireLock(folder: ResultFolder): void {
  const lockPath = join(folder.dir, LOCK_FILE);
  const info: LockInfo = {
    pid: process.pid,
    host: hostname(),
    started: processStarted,
    acquired: new Date().toISOString(),
    command: process.argv.slice(1).join(' '),
  };
  const content = JSON.stringify(info, null, 2) + '\n';
  const temp = join(folder.dir, `${LOCK_TEMP_PREFIX}${process.pid}-${Math.random().toString(36).slice(2)}`);
  writeFileSync(temp, content, { flag: 'wx' });
  /** True when the lock is ours now, false when one exists. */
  const create = (): boolean => {
    try {
      linkSync(temp, lockPath);
      return true;
    } catch (error) {
      const code = (error as NodeJS.ErrnoException).code;
      if (code === 'EEXIST') return false;
      // File systems without hard links (FAT on a USB stick, some network shares): create it exclusively instead
      // (O_EXCL); it is empty for an instant, which readers take for a lock being written (see below).
      if (code !== 'EPERM' && code !== 'ENOTSUP' && code !== 'EOPNOTSUPP' && code !== 'ENOSYS' && code !== 'EMLINK') throw error;
    }
    try {
      writeFileSync(lockPath, content, { flag: 'wx' });
      return true;
    } catch (error) {
      if ((error as NodeJS.ErrnoException).code === 'EEXIST') return false;
      throw error;
    }
  };
  try {
    for (let attempt = 0; attempt < 3; attempt++) {
      if (create()) {
        held.set(folder.dir, folder);
        installExitHook();
        return;
      }
      const holder = readLock(lockPath);
      if (holder === null && lockAgeMs(lockPath) < LOCK_WRITE_GRACE_MS) {
        throw inputError(`output folder ${folder.given} is in use by another piezomap run (its lock file ${LOCK_FILE} is being written)`, {
          file: lockPath,
          hint: 'wait for that run to end, or choose another folder with -o',
        });
      }
      const stale = holder === null ? 'damaged' : staleReason(holder);
      if (!stale) {
        throw inputError(`output folder ${folder.given} is in use by another piezomap run (${describeHolder(holder!)})`, {
          file: lockPath,
          hint:
            holder!.host === hostname()
              ? 'wait for that run to end, or choose another folder with -o'
              : `that host's run cannot be checked from here: wait for it, or, if it is sure to have ended, delete ${lockPath}`,
        });
      }
      // Move the stale lock aside (one rename), then check that what moved is the lock judged stale.
      const aside = `${temp}-stale`;
      try {
        renameSync(lockPath, aside);
      } catch (error) {
        if ((error as NodeJS.ErrnoException).code === 'ENOENT') continue;
        throw error;
      }
      const moved = readLock(aside);
      if (JSON.stringify(moved) !== JSON.stringify(holder)) {
        // Another run took the lock meanwhile: give it back and refuse.
        try {
          linkSync(aside, lockPath);
        } catch {
          // a third run holds it now; either way the folder is in use
        }
        rmSync(aside, { force: true });
        continue;
      }
      rmSync(aside, { force: true });
      folder.notes.push(
        holder === null
          ? `a damaged lock file in ${folder.given} was replaced`
          : `took over the stale lock of an earlier run into ${folder.given} (${describeHolder(holder)}, ${stale})`,
      );
    }
    throw inputError(`output folder ${folder.given} is in use by another piezomap run (its lock keeps changing)`, { file: lockPath });
  } finally {
    rmSync(temp, { force: true });
  }
}

/** Release the lock of a folder this process holds (nothing when it does not). */
export function releaseResultFolder(outDir: string): void {
  const dir = resolve(outDir);
  if (!held.delete(dir)) return;
  const lockPath = join(dir, LOCK_FILE);
  const info = readLock(lockPath);
  if (info && info.pid === process.pid && info.host === hostname()) rmSync(lockPath, { force: true });
}

function installExitHook(): void {
  if (exitHookInstalled) return;
  exitHookInstalled = true;
  process.once('exit', () => abandonResultFoldersSync());
}

/**
 * For signal handlers and process exit (synchronous): remove staging folders being filled and release every lock this
 * process holds. A commit is never in progress here (it runs in one synchronous block). Returns the folders whose new
 * results were completed by this process.
 */
export function abandonResultFoldersSync(): { committed: string[] } {
  for (const staging of liveStaging) {
    try {
      // The staged files are written concurrently on the thread pool: one may be created after the removal listed the
      // folder, and the folder's own removal then fails (ENOTEMPTY). Retried, the removal lists it again; once the
      // folder is gone no write in flight can create a file in it.
      rmSync(staging, { recursive: true, force: true, maxRetries: 20, retryDelay: 5 });
    } catch {
      // best effort while exiting
    }
  }
  liveStaging.clear();
  for (const dir of [...held.keys()]) {
    try {
      releaseResultFolder(dir);
    } catch {
      // best effort while exiting
    }
  }
  return { committed: [...committed] };
}

// ---- folders -----------------------------------------------------------------------------------------------------

/**
 * Create a folder and its missing parents. Not `mkdir(dir, { recursive: true })`: on Node 20 that call never
 * returns for a path below /proc (it keeps retrying), so the parents are walked and created one by one here.
 */
export async function makeFolders(dir: string): Promise<void> {
  const missing: string[] = [];
  for (let at = resolve(dir); ; ) {
    let isFolder: boolean;
    try {
      isFolder = (await stat(at)).isDirectory();
    } catch (error) {
      // ENOTDIR: some ancestor is a file; walk up to it so that the message names it.
      const code = (error as NodeJS.ErrnoException).code;
      if (code !== 'ENOENT' && code !== 'ENOTDIR') throw error;
      missing.push(at);
      const parent = dirname(at);
      if (parent === at) break;
      at = parent;
      continue;
    }
    if (!isFolder) throw Object.assign(new Error(`${at} is a file, not a folder`), { code: 'ENOTDIR', path: at });
    break;
  }
  for (let i = missing.length - 1; i >= 0; i--) {
    try {
      await mkdir(missing[i]!);
    } catch (error) {
      if ((error as NodeJS.ErrnoException).code !== 'EEXIST') throw error;
    }
  }
}

/** A file-system failure in words (the Node message names the system call, which users need not see). */
function fileSystemReason(error: unknown): string {
  const e = error as NodeJS.ErrnoException;
  const where = e.path ? ` (${e.path})` : '';
  switch (e.code) {
    case 'EACCES':
    case 'EPERM':
      return `permission denied${where}`;
    case 'EROFS':
      return `read-only file system${where}`;
    case 'ENOSPC':
      return `no space left on the device${where}`;
    case 'ENOTDIR':
      return `${e.path ?? 'a part of the path'} is a file, not a folder`;
    case 'ENOENT':
      return `the file system does not allow a folder there${where}`;
    default:
      return describeThrown(error);
  }
}
