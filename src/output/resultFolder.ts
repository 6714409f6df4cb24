import { mkdir, readdir, rename, rm, stat, writeFile, access, constants } from 'node:fs/promises';
import { dirname, join, resolve } from 'node:path';
import { PiezomapError, describeThrown, inputError } from '../errors.js';

/** Files piezomap writes into a result folder; their presence marks a folder as holding earlier results. */
export const RESULT_MARKER = 'summary.json';
const TEMP_PREFIX = '.piezomap-tmp-';

export interface OutputFile {
  /** Path relative to the result folder, e.g. `head.tif` or `expanded/head.tif`. */
  name: string;
  bytes: Uint8Array | string;
}

/** Temporary files currently on disk, so an interrupted run can remove them (see removeTemporaryFiles). */
const liveTemporaries = new Set<string>();

/**
 * Make sure OUTDIR can take new results: it is created when missing; when it already holds piezomap results
 * it is refused unless `overwrite` is set (old and new results are never mixed); a non-writable folder is refused.
 * Call this before any long work so the user learns of the problem at once.
 */
export async function prepareResultFolder(outDir: string, overwrite: boolean): Promise<void> {
  const dir = resolve(outDir);
  try {
    const s = await stat(dir);
    if (!s.isDirectory()) throw inputError(`output path ${outDir} exists and is not a folder`);
    const entries = await readdir(dir);
    const hasResults = entries.includes(RESULT_MARKER) || entries.includes('baseline') || entries.includes('comparison.csv');
    if (hasResults && !overwrite) {
      throw inputError(`output folder ${outDir} already holds results`, {
        file: outDir,
        hint: 'choose another folder with -o, or pass --overwrite to replace them',
      });
    }
  } catch (error) {
    if (error instanceof PiezomapError) throw error;
    const code = (error as NodeJS.ErrnoException).code;
    if (code !== 'ENOENT' && code !== 'ENOTDIR') {
      throw inputError(`cannot use output folder ${outDir}: ${fileSystemReason(error)}`, { file: outDir });
    }
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
}

/**
 * Write a complete set of result files: every file first goes to a temporary name in its folder; only when
 * all are written are earlier piezomap results removed and the new files renamed into place. A failure
 * part-way removes the temporaries and leaves the folder as it was.
 */
export async function writeResultFiles(outDir: string, files: OutputFile[], previous: string[] = []): Promise<string[]> {
  const dir = resolve(outDir);
  const staged: Array<{ temp: string; final: string }> = [];
  try {
    for (const file of files) {
      const final = join(dir, file.name);
      const folder = join(final, '..');
      await makeFolders(folder);
      const temp = join(folder, `${TEMP_PREFIX}${process.pid}-${staged.length}`);
      liveTemporaries.add(temp);
      staged.push({ temp, final });
      await writeFile(temp, file.bytes);
    }
    for (const old of previous) {
      if (!files.some((f) => f.name === old)) await rm(join(dir, old), { force: true });
    }
    // A signal during the renames must not leave a partial set: the files already renamed count as temporaries
    // until the last one is in place.
    for (const { temp, final } of staged) {
      liveTemporaries.add(final);
      await rename(temp, final);
      liveTemporaries.delete(temp);
    }
    for (const { final } of staged) liveTemporaries.delete(final);
  } catch (error) {
    await removeTemporaryFiles();
    throw new PiezomapError('internal', `could not write results into ${outDir}: ${describeThrown(error)}`, { file: outDir });
  }
  return staged.map((s) => s.final);
}

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

/** Remove temporary files of this process (used on failure and on SIGINT/SIGTERM). */
export async function removeTemporaryFiles(): Promise<void> {
  const temps = [...liveTemporaries];
  liveTemporaries.clear();
  await Promise.all(temps.map((t) => rm(t, { force: true }).catch(() => undefined)));
}

/** Synchronous variant for signal handlers, which must not wait on the event loop. */
export function removeTemporaryFilesSync(rmSync: (path: string, options: { force: boolean }) => void): void {
  for (const t of liveTemporaries) {
    try {
      rmSync(t, { force: true });
    } catch {
      // best effort while exiting
    }
  }
  liveTemporaries.clear();
}
