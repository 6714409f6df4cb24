/**
 * The worker-thread side of workers.ts: build the field from the copied input, track the bands asked for (a fresh
 * FaceCache per band, as `endRasters` does) and send each band's rasters back, transferred.
 */
import { parentPort } from 'node:worker_threads';
import { describeThrown } from '../../errors.js';
import { buildTrackingField } from './field.js';
import { FaceCache } from './pollock.js';
import { bandRows, trackBand } from './rasters.js';
import type { BandMessage, BandRequest } from './workers.js';

const port = parentPort;
if (!port) throw new Error('trackingWorker.js runs only as a worker thread');

port.once('message', (request: BandRequest) => {
  const send = (message: BandMessage, transfer: ArrayBuffer[] = []) => port.postMessage(message, transfer);
  try {
    const field = buildTrackingField(request.input);
    const cache = request.options.exact ? null : new FaceCache(field, request.options);
    for (const band of request.bands) {
      const [rowStart, rowEnd] = bandRows(field.ny, band);
      const cells = (rowEnd - rowStart) * field.nx;
      const out = { label: new Int32Array(cells), time: new Float64Array(cells), stalled: 0 };
      out.stalled = trackBand(field, band, out, cache, request.options);
      send({ kind: 'band', band, label: out.label, time: out.time, stalled: out.stalled }, [
        out.label.buffer as ArrayBuffer,
        out.time.buffer as ArrayBuffer,
      ]);
    }
    send({ kind: 'done' });
  } catch (thrown) {
    send({ kind: 'error', message: describeThrown(thrown) });
  }
});
