/**
 * `piezomap ensemble merge`: read shard folders (summary.json, realisations.f32 and capture.i32 written by
 * `--shard K/N`), check that they are shards of one ensemble (same fingerprint: scenario, solver overrides, program
 * version), that together they hold every realisation exactly once and that their files have the sizes their
 * summaries imply, and give the files' values as an `EnsembleSource` in realisation order.
 *
 * Out of core: the per-cell values stay in the shard files; `readBlock` reads one block of rows of one field of
 * every realisation (one positioned read per realisation), into one buffer reused from block to block, and the
 * capture counts are summed run by run. Memory: realisations x block cells x 4 bytes for the block, plus one run's
 * capture counts (and one shard's slice of them), plus the point values of every realisation (small).
 */
import { closeSync, fstatSync, openSync, readSync } from 'node:fs';
import { readFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { inputError } from '../errors.js';
import { RESULT_MARKER } from '../output/resultFolder.js';
import {
  captureLength,
  fieldsPerRealisation,
  SHARD_CAPTURE,
  SHARD_VALUES,
  type EnsembleRunInfo,
  type EnsembleSource,
  type ShardSummaryJson,
} from './files.js';
import type { EnsembleSetup, RealisationPoints } from './types.js';

export interface MergedShards {
  setup: EnsembleSetup;
  /** The values, read from the shard files on demand; call `close` when done. */
  source: EnsembleSource;
  runInfo: EnsembleRunInfo;
  /** The shard folders, absolute (a merge must not write into one). */
  folders: string[];
  /** Close the shard files. */
  close(): void;
}

async function readShard(dir: string): Promise<{ summary: ShardSummaryJson }> {
  const path = join(dir, RESULT_MARKER);
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch {
    throw inputError(`${dir}: no ${RESULT_MARKER}: not a finished shard folder`, {
      file: path,
      hint: 'run that shard (piezomap ensemble SCENARIO --shard K/N -o DIR) to the end first',
    });
  }
  let summary: ShardSummaryJson;
  try {
    summary = JSON.parse(text) as ShardSummaryJson;
  } catch {
    throw inputError(`${path}: not valid JSON`, { file: path });
  }
  if (summary?.command !== 'ensemble-shard' || !summary.setup || !Array.isArray(summary.records)) {
    throw inputError(`${dir}: not a shard folder of "piezomap ensemble --shard" (its ${RESULT_MARKER} is of another command)`, {
      file: path,
    });
  }
  return { summary };
}

/** Open a shard's value file and check its size against what the summary implies. */
function openShardFile(dir: string, name: string, expected: number, what: string): number {
  const path = join(dir, name);
  let fd: number;
  try {
    fd = openSync(path, 'r');
  } catch {
    throw inputError(`${dir}: ${name} is missing`, { file: path, hint: 'the shard folder is damaged or incomplete: run that shard again' });
  }
  const size = fstatSync(fd).size;
  if (size !== expected) {
    closeSync(fd);
    throw inputError(`${path}: ${size} bytes, expected ${expected} for ${what}`, {
      file: path,
      hint: 'the shard folder is damaged or incomplete: run that shard again',
    });
  }
  return fd;
}

function readExactly(fd: number, target: Uint8Array, position: number): void {
  let done = 0;
  while (done < target.byteLength) {
    const n = readSync(fd, target, done, target.byteLength - done, position + done);
    if (n <= 0) throw inputError(`a shard file ended early (at byte ${position + done})`);
    done += n;
  }
}

export async function readShards(dirs: readonly string[]): Promise<MergedShards> {
  if (dirs.length === 0) throw inputError('ensemble merge: no shard folder given');
  const shards = [];
  for (const dir of dirs) shards.push({ dir, ...(await readShard(dir)) });
  const first = shards[0]!;
  const setupText = JSON.stringify(first.summary.setup);
  const seenK = new Map<number, string>();
  for (const s of shards) {
    if (s.summary.setup.fingerprint !== first.summary.setup.fingerprint || JSON.stringify(s.summary.setup) !== setupText) {
      throw inputError(
        `ensemble merge: ${s.dir} is a shard of another ensemble than ${first.dir} (scenario, solver options or program version differ)`,
      );
    }
    if (s.summary.shard.n !== first.summary.shard.n)
      throw inputError(
        `ensemble merge: ${s.dir} is shard ${s.summary.shard.k}/${s.summary.shard.n}, ${first.dir} ${first.summary.shard.k}/${first.summary.shard.n}: the shard counts differ`,
      );
    const other = seenK.get(s.summary.shard.k);
    if (other !== undefined)
      throw inputError(`ensemble merge: ${other} and ${s.dir} are both shard ${s.summary.shard.k}/${s.summary.shard.n}`);
    seenK.set(s.summary.shard.k, s.dir);
  }
  const n = first.summary.shard.n;
  const missing = Array.from({ length: n }, (_, i) => i + 1).filter((k) => !seenK.has(k));
  if (missing.length)
    throw inputError(`ensemble merge: shard(s) ${missing.map((k) => `${k}/${n}`).join(', ')} missing`, {
      hint: 'give every shard folder of the run',
    });
  const setup = first.summary.setup;
  const slot = new Map<number, { shard: number; position: number }>();
  shards.forEach((s, si) => {
    s.summary.records.forEach((record, position) => {
      if (slot.has(record.index)) throw inputError(`ensemble merge: realisation ${record.index} is in two shards`);
      slot.set(record.index, { shard: si, position });
    });
  });
  const points: RealisationPoints[] = [];
  const where: Array<{ shard: number; position: number }> = [];
  for (let i = 0; i < setup.realisations; i++) {
    const at = slot.get(i);
    if (!at) throw inputError(`ensemble merge: realisation ${i} is in no shard`);
    points.push(shards[at.shard]!.summary.records[at.position]!);
    where.push(at);
  }
  const cells = setup.grid.nx * setup.grid.ny;
  const per = fieldsPerRealisation(setup);
  const captureTotal = setup.runs.reduce((sum, _, r) => sum + captureLength(setup, r), 0);
  const valueFds: number[] = [];
  const captureFds: number[] = [];
  const close = () => {
    for (const fd of [...valueFds, ...captureFds]) closeSync(fd);
    valueFds.length = 0;
    captureFds.length = 0;
  };
  try {
    for (const s of shards) {
      const count = s.summary.records.length;
      valueFds.push(openShardFile(s.dir, SHARD_VALUES, count * per * cells * 4, `${count} realisation(s)`));
      if (setup.capture) captureFds.push(openShardFile(s.dir, SHARD_CAPTURE, captureTotal * 4, 'the capture counts'));
    }
  } catch (thrown) {
    close();
    throw thrown;
  }
  let buffer = new Float32Array(0);
  const source: EnsembleSource = {
    setup,
    points,
    readBlock(field, r0, r1, include) {
      const nx = setup.grid.nx;
      const blockCells = (r1 - r0) * nx;
      const wanted = include.filter(Boolean).length * blockCells;
      if (buffer.length < wanted) buffer = new Float32Array(wanted);
      let used = 0;
      return where.map(({ shard, position }, i) => {
        if (!include[i]) return null;
        const view = buffer.subarray(used, used + blockCells);
        used += blockCells;
        const offset = ((position * per + field) * cells + r0 * nx) * 4;
        readExactly(valueFds[shard]!, new Uint8Array(view.buffer, view.byteOffset, view.byteLength), offset);
        return view;
      });
    },
    captureCounts(run) {
      if (!setup.capture) return null;
      const length = captureLength(setup, run);
      let offset = 0;
      for (let r = 0; r < run; r++) offset += captureLength(setup, r);
      const sum = new Int32Array(length);
      const part = new Int32Array(length);
      for (const fd of captureFds) {
        readExactly(fd, new Uint8Array(part.buffer), offset * 4);
        for (let p = 0; p < length; p++) sum[p]! += part[p]!;
      }
      return sum;
    },
  };
  shards.sort((a, b) => a.summary.shard.k - b.summary.shard.k);
  const runInfo: EnsembleRunInfo = {
    hosts: [...new Set(shards.flatMap((s) => s.summary.run.hosts))],
    shards: shards.map((s) => ({
      shard: `${s.summary.shard.k}/${n}`,
      realisations: s.summary.range,
      host: s.summary.run.hosts.join(', '),
      workers: s.summary.run.workers ?? 1,
      seconds: s.summary.run.seconds.total ?? (s.summary.run.seconds.load ?? 0) + (s.summary.run.seconds.realisations ?? 0),
    })),
    seconds: {},
  };
  return { setup, source, runInfo, folders: dirs.map((d) => resolve(d)), close };
}
