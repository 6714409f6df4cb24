/**
 * A team of threads for one solver session: the calling thread is thread 0 and runs the solver; `size - 1` helper
 * threads (./teamWorker.ts), started once and reused across solves and set-ups, wait at a barrier and run the same
 * kernel on their own block of rows whenever thread 0 asks (fork–join, see ./teamKernels.ts). All the vectors and
 * level arrays the kernels touch live in shared memory (SharedArrayBuffer) and are registered once per set-up.
 *
 * Synchronisation is a central barrier on an Int32Array (spin briefly, then Atomics.wait), so thread 0 never returns
 * to its event loop during a solve: a team works in the main thread (inline executor, benchmark) as in a worker
 * (the worker executor, whose termination on SIGINT ends the helpers with it). Helpers are unref'd: a team left open
 * does not keep the process alive.
 */
import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { fileURLToPath } from 'node:url';
import { MessageChannel, type MessagePort, Worker } from 'node:worker_threads';
import { PiezomapError } from '../errors.js';
import {
  barrier,
  CONTROL,
  OP,
  PARTIALS_PER_THREAD,
  runKernel,
  SCALARS,
  SPIN_MICROS,
  SPIN_MICROS_MIN,
  type TeamArray,
  type TeamContext,
  warmUpAlone,
} from './teamKernels.js';

const WORKER_URL = new URL('./teamWorker.js', import.meta.url);

/** Most threads `auto` uses: beyond this the stencil kernels are limited by memory bandwidth on common machines. */
export const AUTO_THREADS_MAX = 8;
/**
 * Fewest cells of a grid for which `auto` uses more than one thread. Measured on the benchmark case (bench/README.md,
 * "Threads"): at 512^2 two threads spent 45 % more CPU time than one (helper start, the team's warm-up, barriers) for
 * no gain; from 1024^2 on they pay.
 */
export const AUTO_THREADS_MIN_CELLS = 1_000_000;
/**
 * Fewest cells of a multigrid level (or of the grid, for the CG vectors) on which the team shares the work; smaller
 * levels are run by thread 0 alone while the helpers wait (a kernel there is shorter than the barriers around it).
 * Measured with 2 threads (wall time of the solve, best of 5, load average about 3.5 on 2 cores): at 1024^2 16 384
 * gave 1.19-1.23 s, 32 768 1.27-1.31 s (its serial levels took 120-145 ms of thread 0's time, 16 384's 52-55 ms) and
 * 4 096 1.33-1.42 s (the smallest levels' kernels are then shorter than their barriers on a busy machine); at 2048^2
 * the serial part fell from about 220 ms to 60 ms.
 */
export const PARALLEL_MIN_CELLS = 16_384;

/** A thread-count setting: a whole number >= 1, or 'auto'. */
export type ThreadSetting = number | 'auto';

/**
 * The number of threads a solve on `cells` cells uses for a setting. `auto`: one below AUTO_THREADS_MIN_CELLS; above,
 * the cores the machine offers, at most AUTO_THREADS_MAX. It depends on the machine and the grid only, never on the
 * load at the moment: the thread count decides how the block Gauss–Seidel smoother splits the rows, so a run's heads
 * are the same bytes every time it is repeated on the same machine. On a machine whose cores are all taken by other
 * work more threads make a solve slower (a thread waiting for a core holds up the others at every barrier,
 * bench/README.md, "Threads"): there, `--threads 1` is the better choice, and the README says so.
 */
export function resolveThreads(setting: ThreadSetting | undefined, cells: number): number {
  if (setting === undefined) return 1;
  if (setting === 'auto') {
    if (cells < AUTO_THREADS_MIN_CELLS) return 1;
    return Math.max(1, Math.min(availableParallelism(), AUTO_THREADS_MAX));
  }
  return Math.max(1, Math.floor(setting));
}

/** True when the compiled helper script is there (it is not when running from TypeScript sources). */
export function teamAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

/** True when `a` lives in shared memory, so that the helpers can use it. */
export function inSharedMemory(a: ArrayBufferView): boolean {
  return typeof SharedArrayBuffer !== 'undefined' && a.buffer instanceof SharedArrayBuffer;
}

/** Typed arrays in shared memory, for the solver's workspaces when a team uses them. */
export const sharedAlloc = {
  f64: (n: number): Float64Array => new Float64Array(new SharedArrayBuffer(8 * n)),
  f32: (n: number): Float32Array => new Float32Array(new SharedArrayBuffer(4 * n)),
  u8: (n: number): Uint8Array => new Uint8Array(new SharedArrayBuffer(n)),
};

/** How long thread 0 waits for the helpers to start before it gives up. */
const START_TIMEOUT_MS = 30_000;

export class Team {
  readonly size: number;
  private readonly control: Int32Array;
  private readonly scalars: Float64Array;
  private readonly workers: Worker[] = [];
  private readonly ports: MessagePort[] = [];
  private readonly ctx: TeamContext;
  private readonly ids = new Map<TeamArray, number>();
  /** Arrays registered since the helpers last received the table. */
  private pending: TeamArray[] = [];
  private resetPending = false;
  private closed = false;
  /** Set once thread 0 has waited for the helpers to start (before the first kernel). */
  private started = false;
  /** Kernels run since the team started (for the statistics). */
  kernels = 0;

  /** Launches `size - 1` helper threads; the first kernel waits until they run. */
  constructor(size: number) {
    if (!Number.isInteger(size) || size < 1) throw new PiezomapError('internal', `a thread team needs at least 1 thread, got ${size}`);
    this.size = size;
    this.control = new Int32Array(new SharedArrayBuffer(4 * CONTROL.length));
    this.scalars = new Float64Array(new SharedArrayBuffer(8 * (SCALARS.partials + size * PARTIALS_PER_THREAD)));
    this.ctx = { size, control: this.control, scalars: this.scalars, arrays: [] };
    this.control[CONTROL.spinMicros] = size <= availableParallelism() ? SPIN_MICROS : SPIN_MICROS_MIN;
    for (let t = 1; t < size; t++) {
      const { port1, port2 } = new MessageChannel();
      const worker = new Worker(WORKER_URL, {
        workerData: { control: this.control, scalars: this.scalars, size, index: t, port: port2 },
        transferList: [port2],
      });
      worker.unref();
      port1.unref();
      this.workers.push(worker);
      this.ports.push(port1);
    }
  }

  /**
   * Before the first kernel: thread 0 compiles the kernels (the helpers do the same as they start) and waits until
   * every helper runs. The constructor only launches the helpers, so that thread 0 can do serial set-up work (the
   * `auto` choice, the operator's scale) while they start.
   */
  private awaitStart(): void {
    this.started = true;
    const size = this.size;
    warmUpAlone();
    const deadline = performance.now() + START_TIMEOUT_MS;
    for (;;) {
      const started = Atomics.load(this.control, CONTROL.started);
      if (started === size - 1) break;
      if (performance.now() > deadline) {
        void this.close();
        throw new PiezomapError('internal', `the solver's helper threads did not start within ${START_TIMEOUT_MS / 1000} s`);
      }
      Atomics.wait(this.control, CONTROL.started, started, 100);
    }
  }

  /** A team of `threads` threads, or null when one thread is asked for or the helper script is not there. */
  static start(threads: number): Team | null {
    if (threads < 2 || !teamAvailable()) return null;
    return new Team(threads);
  }

  /** Forgets every registered array (a new set-up registers its own); the helpers drop theirs at the next kernel. */
  resetArrays(): void {
    this.ids.clear();
    this.ctx.arrays.length = 0;
    this.pending = [];
    this.resetPending = true;
  }

  /** The id of a shared array in the team's table (registered on first use). */
  id(a: TeamArray): number {
    const known = this.ids.get(a);
    if (known !== undefined) return known;
    if (!inSharedMemory(a)) throw new PiezomapError('internal', 'thread team: an array outside shared memory cannot be shared');
    const id = this.ctx.arrays.length;
    this.ctx.arrays.push(a);
    this.ids.set(a, id);
    this.pending.push(a);
    return id;
  }

  /**
   * Runs kernel `op` on every thread with integer arguments `ints` and floating-point arguments `floats`; returns when
   * every thread has finished. Partial sums are then read with `sum(k)`.
   */
  run(op: number, ints: ArrayLike<number>, floats: ArrayLike<number> = []): void {
    if (this.closed) throw new PiezomapError('internal', 'thread team: used after close');
    if (!this.started) this.awaitStart();
    if (this.pending.length > 0 || this.resetPending) this.sendTable();
    const control = this.control;
    for (let i = 0; i < ints.length; i++) control[CONTROL.args + i] = ints[i]!;
    for (let i = 0; i < floats.length; i++) this.scalars[SCALARS.args + i] = floats[i]!;
    this.fork(op);
    try {
      runKernel(this.ctx, op, 0);
    } catch (thrown) {
      // the helpers are now at a different barrier than thread 0: the team cannot be used again
      void this.close();
      throw thrown;
    }
    this.join();
    this.kernels++;
  }

  /** Partial sum k of the last kernel, added up in thread order. */
  sum(k: number): number {
    let s = 0;
    for (let t = 0; t < this.size; t++) s += this.scalars[SCALARS.partials + t * PARTIALS_PER_THREAD + k]!;
    return s;
  }

  private fork(op: number): void {
    this.control[CONTROL.op] = op;
    barrier(this.control, this.size);
  }

  private join(): void {
    barrier(this.control, this.size);
    if (Atomics.load(this.control, CONTROL.failed) !== 0) {
      // a helper that threw may have skipped a barrier inside its kernel: the team cannot be used again
      void this.close();
      throw new PiezomapError('internal', 'a helper thread of the solver failed in a kernel');
    }
  }

  private sendTable(): void {
    for (const port of this.ports) port.postMessage(this.pending);
    this.control[CONTROL.args] = this.resetPending ? 1 : 0;
    this.pending = [];
    this.resetPending = false;
    this.fork(OP.table);
    this.join();
  }

  /**
   * Ends the helpers (terminated wherever they wait: they hold nothing but shared memory) and resolves when every one
   * has exited. Never blocks on a barrier, so it works even when a helper has died.
   */
  close(): Promise<void> {
    this.closed = true;
    for (const port of this.ports) port.close();
    return Promise.all(this.workers.map((w) => w.terminate())).then(() => undefined);
  }

  /** The helper threads (for tests that check they are gone). */
  get threads(): readonly Worker[] {
    return this.workers;
  }
}
