/**
 * Arrays that a solve worker (./worker.ts) uses without a copy: typed arrays over a SharedArrayBuffer are shared by
 * postMessage, not cloned. The assembly allocates the operator's bands this way, so that opening a worker session
 * costs no copy of the operator; a band in ordinary memory (e.g. an operator built by a library user) is copied
 * into shared memory once, which is still cheaper than a structured clone (one copy instead of two).
 */

/** A zero-filled Float64Array of `n` values in shared memory. */
export function sharedFloat64Array(n: number): Float64Array {
  return new Float64Array(new SharedArrayBuffer(8 * n));
}

/** A zero-filled Uint8Array of `n` values in shared memory. */
export function sharedUint8Array(n: number): Uint8Array {
  return new Uint8Array(new SharedArrayBuffer(n));
}

/** True when `a` lives in shared memory (posting it to a worker shares it). */
export function isShared(a: ArrayBufferView): boolean {
  return typeof SharedArrayBuffer !== 'undefined' && a.buffer instanceof SharedArrayBuffer;
}

/** `a` itself when it lives in shared memory, else a copy of it there. */
export function shared<T extends Float64Array | Uint8Array>(a: T): T {
  if (isShared(a)) return a;
  const copy = (a instanceof Float64Array ? sharedFloat64Array(a.length) : sharedUint8Array(a.length)) as T;
  copy.set(a);
  return copy;
}
