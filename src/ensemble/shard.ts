/**
 * `piezomap ensemble merge`: read shard folders (summary.json and realisations.f32 written by `--shard K/N`),
 * check that they are shards of one ensemble (same fingerprint: scenario, solver overrides, program version),
 * that together they hold every realisation exactly once, and return the records in realisation order.
 */
import { readFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { inputError } from '../errors.js';
import { RESULT_MARKER } from '../output/resultFolder.js';
import { SHARD_VALUES, shardRecords, type EnsembleRunInfo, type ShardSummaryJson } from './files.js';
import type { EnsembleSetup, RealisationRecord } from './types.js';

export interface MergedShards {
  setup: EnsembleSetup;
  records: RealisationRecord[];
  runInfo: EnsembleRunInfo;
  /** The shard folders, absolute (a merge must not write into one). */
  folders: string[];
}

async function readShard(dir: string): Promise<{ summary: ShardSummaryJson; bytes: Uint8Array }> {
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
  const bytes = await readFile(join(dir, SHARD_VALUES)).catch(() => {
    throw inputError(`${dir}: ${SHARD_VALUES} is missing`, { file: join(dir, SHARD_VALUES) });
  });
  return { summary, bytes };
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
  const byIndex = new Map<number, RealisationRecord>();
  for (const s of shards) {
    for (const record of shardRecords(s.summary, s.bytes, s.dir)) {
      if (byIndex.has(record.index)) throw inputError(`ensemble merge: realisation ${record.index} is in two shards`);
      byIndex.set(record.index, record);
    }
  }
  const records: RealisationRecord[] = [];
  for (let i = 0; i < setup.realisations; i++) {
    const r = byIndex.get(i);
    if (!r) throw inputError(`ensemble merge: realisation ${i} is in no shard`);
    records.push(r);
  }
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
  return { setup, records, runInfo, folders: dirs.map((d) => resolve(d)) };
}
