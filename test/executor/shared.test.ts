/**
 * Bands handed to a solve worker: those in shared memory go as they are (postMessage shares them, HTML Living
 * Standard, structured serialisation of SharedArrayBuffer), others are copied there once with equal values. The
 * worker path itself is checked end to end against the in-thread solve in test/e2e/determinism.test.ts.
 */
import { describe, expect, it } from 'vitest';
import { MessageChannel, receiveMessageOnPort } from 'node:worker_threads';
import { isShared, shared, sharedFloat64Array, sharedUint8Array } from '../../src/executor/shared.js';
import { assembleSystem } from '../../src/discretisation/assemble.js';
import { fixedColumn, makeModel, testGrid } from '../helpers/model.js';

describe('shared bands', () => {
  it('a band in shared memory is passed as it is; a plain one is copied into shared memory with equal values', () => {
    const s = sharedFloat64Array(5);
    expect(shared(s)).toBe(s);
    const plain = Float64Array.from([1.5, -2, 3e-300, Number.MAX_VALUE, 0]);
    const copy = shared(plain);
    expect(copy).not.toBe(plain);
    expect(isShared(copy)).toBe(true);
    expect(Array.from(copy)).toEqual(Array.from(plain));
    const mask = Uint8Array.from([0, 1, 1, 0]);
    const maskCopy = shared(mask);
    expect(maskCopy).toBeInstanceOf(Uint8Array);
    expect(Array.from(maskCopy)).toEqual([0, 1, 1, 0]);
    expect(isShared(sharedUint8Array(3))).toBe(true);
  });

  it('posting a shared band shares it (a write on one side is seen on the other), so no copy is made', () => {
    const band = sharedFloat64Array(4);
    const { port1, port2 } = new MessageChannel();
    port1.postMessage(band);
    const received = receiveMessageOnPort(port2)!.message as Float64Array;
    received[2] = 7;
    expect(band[2]).toBe(7);
    port1.close();
  });

  it('the assembly allocates the operator bands in shared memory', () => {
    const grid = testGrid(6, 4, 10);
    const system = assembleSystem(
      makeModel(grid, { conductivity: new Float64Array(24).fill(3), thickness: 10, fixedHeads: [fixedColumn(grid, 0, 10, 'w')] }),
    );
    const op = system.operator;
    expect([op.diag, op.east, op.south, op.unknown].every(isShared)).toBe(true);
  });
});
