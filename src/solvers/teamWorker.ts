/**
 * A helper thread of a thread team (./team.ts): waits at the team's barrier for a kernel, runs it on its own block,
 * meets the others at the barrier again, and so on until the team terminates it. New shared arrays arrive on its port and are
 * read synchronously (receiveMessageOnPort) when thread 0 asks for it, so the loop never returns to the event loop.
 */
import { type MessagePort, receiveMessageOnPort, workerData } from 'node:worker_threads';
import { barrier, CONTROL, OP, runKernel, type TeamArray, type TeamContext, warmUpAlone } from './teamKernels.js';

interface HelperData {
  control: Int32Array;
  scalars: Float64Array;
  size: number;
  index: number;
  port: MessagePort;
}

const data = workerData as HelperData | null;
if (!data || !(data.control instanceof Int32Array)) throw new Error('teamWorker.js runs only as a helper thread of a thread team');

const { control, scalars, size, index, port } = data;
const arrays: TeamArray[] = [];
const ctx: TeamContext = { size, control, scalars, arrays };

Atomics.add(control, CONTROL.started, 1);
Atomics.notify(control, CONTROL.started);
// compile the kernels while thread 0 does the same (the first kernel's barrier waits for this)
try {
  warmUpAlone();
} catch {
  Atomics.store(control, CONTROL.failed, 1);
}
for (;;) {
  barrier(control, size);
  const op = control[CONTROL.op]!;
  if (op === OP.stop) break;
  try {
    if (op === OP.table) {
      if (control[CONTROL.args] === 1) arrays.length = 0;
      const message = receiveMessageOnPort(port);
      if (!message) throw new Error('thread team: the new arrays did not arrive');
      for (const a of message.message as TeamArray[]) arrays.push(a);
    } else runKernel(ctx, op, index);
  } catch {
    // thread 0 sees the flag after the barrier and reports it; the helper keeps meeting the barriers
    Atomics.store(control, CONTROL.failed, 1);
  }
  barrier(control, size);
}
port.close();
