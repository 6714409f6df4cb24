/**
 * The invariant of a result folder after an interruption at any instant (src/output/resultFolder.ts):
 * - "complete": summary.json is there, every file it lists is there and belongs to the run it describes, and no
 *   other file is there apart from piezomap's own recognised leftovers (lock, staging or commit folder);
 * - "in-progress": no summary.json, beside a `.piezomap-commit` folder: a commit cut short, which the next run into
 *   the folder finishes (checked separately);
 * - "empty": nothing but recognised leftovers.
 * Anything else (files without a summary, a listed file missing, a stray file, a file of another run) is a violation.
 */
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { COMMIT_FOLDER, LOCK_FILE, RESULT_MARKER, STAGING_FOLDER } from '../../src/output/resultFolder.js';

export type FolderState = { kind: 'complete'; run: string; files: string[] } | { kind: 'in-progress' } | { kind: 'empty' };

/** Every file below a folder, relative names with '/', hidden ones included. */
export function filesBelow(folder: string): string[] {
  if (!existsSync(folder) || !statSync(folder).isDirectory()) return [];
  return readdirSync(folder, { recursive: true, withFileTypes: true })
    .filter((e) => e.isFile())
    .map((e) =>
      join(e.parentPath, e.name)
        .slice(folder.length + 1)
        .split('\\')
        .join('/'),
    )
    .sort();
}

/** The lock, and the lock file being made (`.piezomap-lock-new-PID-...`, when a run is killed while taking the lock). */
const recognised = (name: string) =>
  name.startsWith(LOCK_FILE) || name.startsWith(`${STAGING_FOLDER}/`) || name.startsWith(`${COMMIT_FOLDER}/`);

/**
 * Classify a folder; throw when it breaks the invariant. `runOf(summary)` names the run a summary.json describes;
 * `belongs(name, bytes, run)` says whether a file's bytes are that run's.
 */
export function folderState(
  dir: string,
  runOf: (summary: { files: string[] } & Record<string, unknown>) => string,
  belongs: (name: string, bytes: Buffer, run: string) => boolean,
): FolderState {
  const all = filesBelow(dir);
  const results = all.filter((f) => !recognised(f));
  if (!results.includes(RESULT_MARKER)) {
    if (results.length === 0) return { kind: 'empty' };
    if (existsSync(join(dir, COMMIT_FOLDER))) return { kind: 'in-progress' };
    throw new Error(`files without a summary.json and no commit to finish: ${results.join(', ')}`);
  }
  const summary = JSON.parse(readFileSync(join(dir, RESULT_MARKER), 'utf8')) as { files: string[] } & Record<string, unknown>;
  const run = runOf(summary);
  const missing = summary.files.filter((f) => !results.includes(f));
  if (missing.length) throw new Error(`summary.json of run ${run} lists missing files: ${missing.join(', ')}`);
  const stray = results.filter((f) => !summary.files.includes(f));
  if (stray.length) throw new Error(`files that summary.json of run ${run} does not list: ${stray.join(', ')}`);
  const foreign = summary.files.filter((f) => !belongs(f, readFileSync(join(dir, f)), run));
  if (foreign.length) throw new Error(`files of another run beside summary.json of run ${run}: ${foreign.join(', ')}`);
  return { kind: 'complete', run, files: summary.files };
}
