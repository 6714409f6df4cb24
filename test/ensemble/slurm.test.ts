/**
 * A real batch engine: a single-node Slurm cluster (Debian's slurm-wlm and munge) started here, on localhost, as
 * root without systemd (ProctrackType=proctrack/linuxproc, TaskPlugin=task/none, its own ports, munge socket and
 * key in a temporary folder). The ensemble is submitted as a job array (`sbatch --array --wait`) whose tasks run
 * `piezomap ensemble --shard auto` (SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_COUNT); the shard folders are merged and
 * the result must equal a one-process run of the same ensemble byte for byte (summary.json apart from its run
 * section). Skips with a message where Slurm or munge is absent or we are not root, outside CI; with CI=true it
 * must run (.ci/run installs slurm-wlm and munge).
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { chmodSync, existsSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { hostname, tmpdir, totalmem, availableParallelism } from 'node:os';
import { join, relative, resolve } from 'node:path';
import { randomBytes } from 'node:crypto';
import { encodeFloat32GeoTiff } from '../../src/raster/write.js';
import { seededRandom, testGrid } from '../helpers/model.js';

const BIN = resolve(__dirname, '../../bin/piezomap.js');
const TOOLS = ['munged', 'slurmctld', 'slurmd', 'sbatch', 'sinfo', 'scontrol'];
const missing = TOOLS.filter((t) => spawnSync('sh', ['-c', `command -v ${t}`]).status !== 0);
const isRoot = process.getuid?.() === 0;
const why = missing.length
  ? `Slurm/munge not installed (${missing.join(', ')} missing; apt-get install slurm-wlm munge)`
  : !isRoot
    ? 'not root (the single-node Slurm of this test runs as root)'
    : null;
const inCi = process.env.CI === 'true';
if (why && !inCi) console.warn(`slurm.test.ts: skipped: ${why}`);

let dir: string;
let conf: string;
let started = false;
let mungePid: number | null = null;

function sh(cmd: string, args: string[], env: NodeJS.ProcessEnv = {}) {
  const r = spawnSync(cmd, args, { encoding: 'utf8', env: { ...process.env, SLURM_CONF: conf, ...env } });
  return { code: r.status, out: `${r.stdout ?? ''}${r.stderr ?? ''}${r.error ? String(r.error) : ''}` };
}

function logs(): string {
  return ['munged.log', 'slurmctld.log', 'slurmd.log']
    .map((f) => (existsSync(join(dir, f)) ? `--- ${f}\n${readFileSync(join(dir, f), 'utf8').split('\n').slice(-15).join('\n')}` : ''))
    .join('\n');
}

function startCluster(): void {
  const host = hostname().split('.')[0]!;
  const key = join(dir, 'munge.key');
  writeFileSync(key, randomBytes(1024));
  chmodSync(key, 0o400);
  const m = sh('munged', [
    '--force',
    `--socket=${dir}/munge.sock`,
    `--key-file=${key}`,
    `--pid-file=${dir}/munged.pid`,
    `--log-file=${dir}/munged.log`,
    `--seed-file=${dir}/munge.seed`,
  ]);
  if (m.code !== 0) throw new Error(`munged did not start: ${m.out}\n${logs()}`);
  mungePid = Number(readFileSync(join(dir, 'munged.pid'), 'utf8').trim());
  mkdirSync(join(dir, 'spool'));
  mkdirSync(join(dir, 'state'));
  const memory = Math.floor(totalmem() / 1024 / 1024 / 2);
  // Ports away from Slurm's defaults, so that a Slurm already on the machine is not disturbed.
  const port = 17000 + (process.pid % 1000) * 2;
  writeFileSync(
    conf,
    [
      'ClusterName=piezotest',
      `SlurmctldHost=${host}(127.0.0.1)`,
      `SlurmctldPort=${port}`,
      `SlurmdPort=${port + 1}`,
      'SlurmUser=root',
      'SlurmdUser=root',
      'AuthType=auth/munge',
      'CredType=cred/munge',
      `AuthInfo=socket=${dir}/munge.sock`,
      'ProctrackType=proctrack/linuxproc',
      'TaskPlugin=task/none',
      'SchedulerType=sched/builtin',
      'SelectType=select/cons_tres',
      'SelectTypeParameters=CR_Core',
      'MpiDefault=none',
      'ReturnToService=2',
      'JobAcctGatherType=jobacct_gather/none',
      'AccountingStorageType=accounting_storage/none',
      `SlurmctldPidFile=${dir}/slurmctld.pid`,
      `SlurmdPidFile=${dir}/slurmd.pid`,
      `SlurmdSpoolDir=${dir}/spool`,
      `StateSaveLocation=${dir}/state`,
      `SlurmctldLogFile=${dir}/slurmctld.log`,
      `SlurmdLogFile=${dir}/slurmd.log`,
      `NodeName=${host} NodeAddr=127.0.0.1 CPUs=${availableParallelism()} RealMemory=${memory} State=UNKNOWN`,
      'PartitionName=main Nodes=ALL Default=YES MaxTime=INFINITE State=UP',
      '',
    ].join('\n'),
  );
  const c = sh('slurmctld', ['-c']);
  if (c.code !== 0) throw new Error(`slurmctld did not start: ${c.out}\n${logs()}`);
  started = true;
  const d = sh('slurmd', ['-c']);
  if (d.code !== 0) throw new Error(`slurmd did not start: ${d.out}\n${logs()}`);
  // Wait for the node to be idle.
  for (let i = 0; i < 60; i++) {
    const s = sh('sinfo', ['-h', '-o', '%T']);
    if (s.code === 0 && /idle/.test(s.out)) return;
    spawnSync('sleep', ['0.5']);
  }
  throw new Error(`the Slurm node did not become idle:\n${sh('sinfo', []).out}\n${logs()}`);
}

function filesBelow(root: string): string[] {
  const out: string[] = [];
  const walk = (d: string) => {
    for (const e of readdirSync(d)) {
      const p = join(d, e);
      if (statSync(p).isDirectory()) walk(p);
      else if (!e.startsWith('.')) out.push(relative(root, p));
    }
  };
  walk(root);
  return out.sort();
}

describe.skipIf(why !== null && !inCi)('ensemble as a Slurm job array', () => {
  beforeAll(() => {
    if (why) throw new Error(`CI=true, but the Slurm test cannot run: ${why}`);
    dir = mkdtempSync(join(tmpdir(), 'piezomap-slurm-'));
    chmodSync(dir, 0o755);
    conf = join(dir, 'slurm.conf');
    startCluster();
  });

  afterAll(() => {
    // The daemons we started, by the pids they wrote: wait until they are gone (they write logs and state until then).
    const pids = ['slurmctld.pid', 'slurmd.pid']
      .map((f) => join(dir ?? '', f))
      .filter((f) => dir && existsSync(f))
      .map((f) => Number(readFileSync(f, 'utf8').trim()))
      .filter((pid) => pid > 0);
    const alive = (pid: number) => {
      try {
        process.kill(pid, 0);
        return true;
      } catch {
        return false;
      }
    };
    if (started) {
      sh('scontrol', ['shutdown']);
      for (let i = 0; i < 40 && pids.some(alive); i++) spawnSync('sleep', ['0.25']);
    }
    if (mungePid) pids.push(mungePid);
    // Whatever did not stop by itself (a busy machine, another cluster's scontrol answering first) is stopped here,
    // and waited for, so that nothing writes into the folder while it is removed.
    for (const pid of pids) {
      if (!alive(pid)) continue;
      try {
        process.kill(pid, pid === mungePid ? 'SIGTERM' : 'SIGKILL');
      } catch {
        // already gone
      }
    }
    for (let i = 0; i < 40 && pids.some(alive); i++) spawnSync('sleep', ['0.25']);
    if (!dir) return;
    try {
      rmSync(dir, { recursive: true, force: true, maxRetries: 10, retryDelay: 200 });
    } catch (error) {
      // A temporary folder left behind is not what this test checks: say so rather than fail the run on it.
      console.warn(`slurm.test.ts: could not remove ${dir}: ${(error as Error).message}`);
    }
  });

  it('sbatch --array --wait with --shard auto, then merge, equals a one-process run', () => {
    const nx = 20;
    const ny = 14;
    const grid = testGrid(nx, ny, 100);
    const random = seededRandom(2);
    writeFileSync(
      join(dir, 'k.tif'),
      encodeFloat32GeoTiff(
        grid,
        Float64Array.from({ length: nx * ny }, () => 5 * Math.exp(random() - 0.5)),
      ),
    );
    const at = (row: number, col: number) => ({ x: 500000 + (col + 0.5) * 100, y: 4100000 - (row + 0.5) * 100 });
    const scenario = join(dir, 'ens.json');
    writeFileSync(
      scenario,
      JSON.stringify({
        aquifer: { conductivity: 'k.tif', thickness: 15 },
        fixedHeads: [
          { edge: 'west', head: 30 },
          { edge: 'east', head: 28 },
        ],
        wells: [{ id: 'W1', ...at(7, 8), rate: -200 }],
        receptors: [{ id: 'R1', ...at(7, 12) }],
        variants: [{ name: 'more', wells: [{ id: 'W1', rate: -400 }] }],
        ensemble: {
          realisations: 9,
          seed: 21,
          logConductivity: { sd: 0.5, correlationLength: 400 },
          drawdownThresholds: [0.5],
          percentiles: [50, 90],
        },
      }),
    );
    const job = join(dir, 'job.sh');
    writeFileSync(
      job,
      `#!/bin/sh\nexec "${process.execPath}" "${BIN}" ensemble "${scenario}" -o "${dir}/shard-$SLURM_ARRAY_TASK_ID" --shard auto --workers 1\n`,
    );
    chmodSync(job, 0o755);
    const t0 = performance.now();
    const sub = sh('sbatch', ['--wait', '--array=0-2', '--cpus-per-task=1', `--output=${dir}/task-%a.log`, job]);
    const seconds = (performance.now() - t0) / 1000;
    const taskLogs = [0, 1, 2]
      .map((k) => (existsSync(join(dir, `task-${k}.log`)) ? readFileSync(join(dir, `task-${k}.log`), 'utf8') : '(no log)'))
      .join('\n');
    expect(sub.code, `${sub.out}\n${taskLogs}\n${logs()}`).toBe(0);
    console.info(`slurm.test.ts: job array of 3 shards took ${seconds.toFixed(1)} s (sbatch --wait)`);
    const merged = join(dir, 'merged');
    const m = spawnSync(process.execPath, [BIN, 'ensemble', 'merge', `${dir}/shard-0`, `${dir}/shard-1`, `${dir}/shard-2`, '-o', merged], {
      encoding: 'utf8',
    });
    expect(m.status, m.stderr).toBe(0);
    const one = join(dir, 'one');
    const r = spawnSync(process.execPath, [BIN, 'ensemble', scenario, '-o', one], { encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    const files = filesBelow(one);
    expect(filesBelow(merged)).toEqual(files);
    for (const f of files) {
      if (f === 'summary.json') continue;
      expect(Buffer.compare(readFileSync(join(one, f)), readFileSync(join(merged, f))), f).toBe(0);
    }
    const strip = (p: string) => {
      const s = JSON.parse(readFileSync(p, 'utf8'));
      delete s.run;
      return s;
    };
    expect(strip(join(merged, 'summary.json'))).toEqual(strip(join(one, 'summary.json')));
    const shards = JSON.parse(readFileSync(join(merged, 'summary.json'), 'utf8')).run.shards;
    expect(shards.map((s: { shard: string }) => s.shard)).toEqual(['1/3', '2/3', '3/3']);
  }, 300_000);
});
