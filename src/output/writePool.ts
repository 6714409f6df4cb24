/**
 * Result products built on a small pool of threads (`piezomap solve` and `compare`): GeoTIFF encoding (tiles,
 * predictor, DEFLATE), contour tracing (one job per field), the contour GeoJSON and
 * the map (SVG drawn and rasterised to PNG). The pool is worker threads plus, once lent (`lendMainThread`), the main
 * thread itself, which takes jobs between its own work like a worker: on a machine of n cores, n - 1 workers and the
 * main thread keep every core busy without the start-up, module loading and compilation of one more worker (about
 * 0.3 s of CPU). Each job runs the code the one-after-another writer runs (./writeJobs.ts), so the bytes are the same.
 *
 * Large arrays go to the workers in shared memory (src/executor/shared.ts), not copied per job: an array is copied
 * there once (`WritePool.share`, remembered per array; arrays handed to the pool must not change afterwards) and
 * every job that reads it uses that copy. Results come back transferred (GeoTIFF bytes, PNG bytes, contour polylines).
 *
 * Scheduling: a thread takes the next job when it is free, `urgent` jobs first (contours and maps, the longest
 * chain: contours -> map), then the others in the order given. Workers hold the process open only while they have
 * work; `close()` ends them.
 */
import { Worker } from 'node:worker_threads';
import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { fileURLToPath } from 'node:url';
import { PiezomapError, type ErrorCode, type ErrorDetail } from '../errors.js';
import type { Grid } from '../grid.js';
import { assembleFloat32GeoTiff, geoTiffTileRows, type EncodeOptions } from '../raster/write.js';
import type { ContourLevel, ContourOptions, ContourSet } from '../analysis/contours.js';
import { contourPlan } from '../analysis/contours.js';
import type { MapInput, MapOptions } from '../report/index.js';
import type { TrackingRun } from '../analysis/tracking/run.js';
import { shared } from '../executor/shared.js';
import type { ContourFileOptions } from './contourFiles.js';
import type { OutputFile } from './resultFolder.js';

/** A map to draw in a worker: MapInput without its overlays (functions), with the tracking run they are drawn from. */
export interface MapJobInput extends Omit<MapInput, 'overlays'> {
  tracking?: { run: TrackingRun; units: { time: string } };
}

/** Main thread to worker. */
export type WriteJob =
  | { kind: 'geotiff'; grid: Grid; values: Float64Array; options: EncodeOptions }
  | { kind: 'geotiffTiles'; grid: Grid; values: Float64Array; options: EncodeOptions; first: number; end: number }
  | { kind: 'contours'; grid: Grid; values: Float64Array; levels: number[] }
  | { kind: 'map'; input: MapJobInput; options: MapOptions }
  | {
      kind: 'contourFiles';
      grid: Grid;
      contours: ContourSet;
      quantity: 'head' | 'drawdown';
      units: string;
      options: ContourFileOptions;
      prefix: string;
    };

export interface WriteRequest {
  id: number;
  job: WriteJob;
}

/** Worker to main thread. */
export type WriteReply =
  | { id: number; ok: true; bytes: Uint8Array }
  | { id: number; ok: true; tiles: { bytes: Uint8Array; lengths: number[] } }
  | { id: number; ok: true; levels: ContourLevel[] }
  | { id: number; ok: true; files: OutputFile[]; warnings: string[] }
  | { id: number; ok: false; code: ErrorCode; message: string; detail: ErrorDetail; stack?: string | undefined };

const WORKER_URL = new URL('./writeWorker.js', import.meta.url);

/** True when the compiled worker script is there (it is not when running from TypeScript sources). */
export function writeWorkersAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

/**
 * Fewest cells of a raster that the pool encodes in bands of tile rows (WritePool.geotiff); a smaller one is one job
 * (a band costs a message each way and a copy of its tiles).
 */
const BAND_MIN_CELLS = 1 << 19;

/** Workers a pool starts by default: one per core but the main thread's, at least 1, at most 3. */
export function defaultWriteThreads(): number {
  return Math.max(1, Math.min(3, availableParallelism() - 1));
}

/** Runs one job in this thread (./writeJobs.ts `runWriteJob`), for the main thread's slot. */
export type WriteJobRunner = (id: number, job: WriteJob) => { reply: WriteReply };

interface Task {
  id: number;
  job: WriteJob;
  resolve: (reply: WriteReply) => void;
  reject: (error: Error) => void;
}

interface Slot {
  worker: Worker;
  task: Task | null;
}

export class WritePool {
  private readonly slots: Slot[] = [];
  private readonly urgent: Task[] = [];
  private readonly normal: Task[] = [];
  private readonly sharedCopies = new WeakMap<ArrayBufferView, Float64Array>();
  private failure: Error | null = null;
  private closed = false;
  private nextId = 1;
  /** The main thread's slot: its runner once lent, and whether it has a job. */
  private runner: WriteJobRunner | null = null;
  private runnerBusy = false;

  constructor(readonly workers: number) {
    for (let k = 0; k < workers; k++) {
      // workerData must be an object: geotiff's web-worker shim reads workerData.mod when loaded off the main thread.
      const worker = new Worker(WORKER_URL, { workerData: {} });
      const slot: Slot = { worker, task: null };
      worker.unref();
      worker.on('message', (reply: WriteReply) => this.settle(slot, reply));
      worker.on('error', (thrown) => this.fail(new PiezomapError('internal', `a result-writing thread failed: ${thrown.message}`)));
      worker.on('exit', (code) => {
        if (!this.closed) this.fail(new PiezomapError('internal', `a result-writing thread stopped unexpectedly (exit code ${code})`));
      });
      this.slots.push(slot);
    }
  }

  /** Threads that take jobs: the workers, and the main thread once lent. */
  get threads(): number {
    return this.workers + (this.runner ? 1 : 0);
  }

  /**
   * Let the main thread take jobs too, between its own work (each job in a turn of the event loop of its own).
   * `runner` is ./writeJobs.ts `runWriteJob`, handed in by the caller, which loads it with the other writers, so
   * that this module stays light to load at start-up.
   */
  lendMainThread(runner: WriteJobRunner): void {
    if (this.runner) return;
    this.runner = runner;
    this.dispatch();
  }

  /** `values` in shared memory: itself when it is there, else one copy made on the first call and reused after. */
  share(values: Float64Array): Float64Array {
    let copy = this.sharedCopies.get(values);
    if (!copy) {
      copy = shared(values);
      this.sharedCopies.set(values, copy);
    }
    return copy;
  }

  /**
   * A Float32 GeoTIFF of `values`, as encodeFloat32GeoTiff gives it. A large raster is encoded in bands of tile rows,
   * a job each, so that the threads finish together rather than wait for one of them to compress a whole raster;
   * this thread then puts the file together.
   */
  async geotiff(grid: Grid, values: Float64Array, options: EncodeOptions): Promise<Uint8Array> {
    const sharedValues = this.share(values);
    const tileRows = geoTiffTileRows(grid, options);
    const bands = grid.nx * grid.ny < BAND_MIN_CELLS ? 1 : Math.min(tileRows, 2 * this.threads);
    if (bands <= 1) {
      const reply = await this.run({ kind: 'geotiff', grid, values: sharedValues, options }, false);
      return (reply as { bytes: Uint8Array }).bytes;
    }
    const jobs: Array<Promise<{ bytes: Uint8Array; lengths: number[] }>> = [];
    for (let b = 0; b < bands; b++) {
      const first = Math.floor((b * tileRows) / bands);
      const end = Math.floor(((b + 1) * tileRows) / bands);
      const job: WriteJob = { kind: 'geotiffTiles', grid, values: sharedValues, options, first, end };
      jobs.push(this.run(job, false).then((r) => (r as { tiles: { bytes: Uint8Array; lengths: number[] } }).tiles));
    }
    return assembleFloat32GeoTiff(grid, values, options, await Promise.all(jobs));
  }

  /**
   * The contours contourField gives, traced in one job: the tracer makes one pass over the cells for all levels
   * (src/analysis/contourTrace.ts), so a second job would only repeat that pass (measured at 1024²: 11 ms for the
   * 17 levels in one call, 24–26 ms for the same levels in four).
   */
  async contours(grid: Grid, values: Float64Array, options: ContourOptions = {}): Promise<ContourSet> {
    const plan = contourPlan(grid, values, options);
    const reply = await this.run({ kind: 'contours', grid, values: this.share(values), levels: plan.levels }, true);
    return { levels: (reply as { levels: ContourLevel[] }).levels, interval: plan.interval, note: plan.note };
  }

  /** The map as PNG bytes, as renderMapPng draws it. */
  async mapPng(input: MapJobInput, options: MapOptions = {}): Promise<Uint8Array> {
    const job: MapJobInput = { ...input, values: this.share(input.values) };
    if (input.flux) job.flux = { qx: this.share(input.flux.qx), qy: this.share(input.flux.qy) };
    const reply = await this.run({ kind: 'map', input: job, options }, true);
    return (reply as { bytes: Uint8Array }).bytes;
  }

  /** The contour GeoJSON files of contourFilesOf (./contourFiles.ts), written in a worker (which holds proj4 for the WGS 84 ones). */
  async contourFiles(
    grid: Grid,
    contours: ContourSet,
    quantity: 'head' | 'drawdown',
    units: string,
    options: ContourFileOptions,
    prefix: string,
  ): Promise<{ files: OutputFile[]; warnings: string[] }> {
    const picked: ContourFileOptions = {};
    if (options.nativeContours !== undefined) picked.nativeContours = options.nativeContours;
    if (options.contourInterval !== undefined) picked.contourInterval = options.contourInterval;
    const reply = await this.run({ kind: 'contourFiles', grid, contours, quantity, units, options: picked, prefix }, true);
    const { files, warnings } = reply as { files: OutputFile[]; warnings: string[] };
    return { files, warnings };
  }

  /**
   * End the workers. Jobs still pending are dropped, not refused: they belong to a write that has already failed
   * (its caller is gone), and a refusal nobody waits for would end the process as an unhandled rejection.
   */
  async close(): Promise<void> {
    if (this.closed) return;
    this.closed = true;
    this.failure ??= new PiezomapError('internal', 'the result-writing threads were closed');
    this.urgent.length = 0;
    this.normal.length = 0;
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
  }

  private run(job: WriteJob, urgent: boolean): Promise<WriteReply> {
    if (this.failure) return Promise.reject(this.failure);
    return new Promise((resolve, reject) => {
      (urgent ? this.urgent : this.normal).push({ id: this.nextId++, job, resolve, reject });
      this.dispatch();
    });
  }

  private dispatch(): void {
    if (this.closed) return;
    for (const slot of this.slots) {
      if (slot.task) continue;
      const task = this.urgent.shift() ?? this.normal.shift();
      if (!task) break;
      slot.task = task;
      // a worker with work holds the process open; an idle one does not
      slot.worker.ref();
      try {
        slot.worker.postMessage({ id: task.id, job: task.job } satisfies WriteRequest);
      } catch (error) {
        // e.g. an array that cannot be cloned
        slot.task = null;
        slot.worker.unref();
        task.reject(
          new PiezomapError('internal', `cannot hand a ${task.job.kind} job to a result-writing thread: ${(error as Error).message}`),
        );
      }
    }
    const runner = this.runner;
    if (runner && !this.runnerBusy) {
      const task = takeFor(this.urgent) ?? takeFor(this.normal);
      if (!task) return;
      this.runnerBusy = true;
      // in a turn of its own, so that the main thread first finishes what it is doing (e.g. handing out more jobs)
      setImmediate(() => {
        const { reply } = runner(task.id, task.job);
        this.runnerBusy = false;
        this.answer(task, reply);
        setImmediate(() => this.dispatch());
      });
    }
  }

  private settle(slot: Slot, reply: WriteReply): void {
    const task = slot.task;
    if (!task || task.id !== reply.id) return;
    slot.task = null;
    slot.worker.unref();
    this.answer(task, reply);
    // The next job is picked once the answer's continuations have run: the last contour job's answer completes the
    // contours, and the map they hand out (urgent) then goes before the rasters already waiting.
    setImmediate(() => this.dispatch());
  }

  private answer(task: Task, reply: WriteReply): void {
    if (reply.ok) task.resolve(reply);
    else {
      const error = new PiezomapError(reply.code, reply.message, reply.detail);
      if (reply.stack) error.stack = reply.stack;
      task.reject(error);
    }
  }

  private fail(error: Error): void {
    this.failure ??= error;
    const pending = [...this.urgent.splice(0), ...this.normal.splice(0)];
    for (const slot of this.slots) {
      if (slot.task) pending.push(slot.task);
      slot.task = null;
      slot.worker.unref();
    }
    for (const task of pending) task.reject(this.failure);
  }
}

/**
 * The first job of `queue` the main thread takes (removed from it): contours and GeoTIFFs, whose code it has warmed
 * up (solveFiles.ts prepareWriting); maps and GeoJSON are left to the workers, which warm up their renderer and proj4.
 */
function takeFor(queue: Task[]): Task | undefined {
  const k = queue.findIndex((t) => t.job.kind === 'contours' || t.job.kind === 'geotiff' || t.job.kind === 'geotiffTiles');
  return k < 0 ? undefined : queue.splice(k, 1)[0];
}

/** A pool of `workers` result-writing workers (default: defaultWriteThreads), or null when the compiled worker is not there. */
export function startWritePool(workers = defaultWriteThreads()): WritePool | null {
  if (!writeWorkersAvailable() || !(workers >= 1)) return null;
  return new WritePool(Math.floor(workers));
}
