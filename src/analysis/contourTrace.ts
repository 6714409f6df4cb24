/**
 * Marching squares for many levels in one pass over a cell-centred field, on typed arrays.
 *
 * The rings are those of d3-contour's `contour(values, level)` without smoothing (the library the tests compare
 * with, and the tracer contours.ts used before): the same vertices in the same order from the same start vertex, the
 * rings of a level in the same order. That order is what the lines written to GeoJSON inherit, so it is kept
 * exactly; how it arises:
 *
 * - Squares. The grid is padded with one row/column of "below every level" all round, and square (x, y), x = -1..nx-1,
 *   y = -1..ny-1, has the cells (x, y), (x+1, y), (x, y+1), (x+1, y+1) as corners. A cell is above level L when its
 *   value >= L (NaN never). Squares are visited row by row, left to right; in each, a fixed table gives 0, 1 or 2
 *   oriented segments between the midpoints of its sides (the region above L always on the same side).
 * - Stitching. Each segment (s -> e) joins the open fragment ending at s and/or the one starting at e: it extends
 *   one (appended, or put in front), joins two (the one ending at s first), closes a ring (when both are the same
 *   fragment: the ring starts at that fragment's first vertex), or starts a new fragment. Rings come out in the
 *   order they close.
 * - Rings with positive area (shoelace in d3-contour's cell space, y down) are outer rings, the others holes; a
 *   level's output is each outer ring in closing order, each followed by the holes assigned to it, in closing order;
 *   a hole goes to the first outer ring, in closing order, that contains it.
 *
 * What we do instead of d3-contour's work per level (a pass over the grid per level, arrays of point arrays, a
 * point-in-polygon test of every hole against the outer rings):
 *
 * - One pass for all levels. Every cell gets its bucket B = the number of levels <= value (0 for NaN); a cell is above
 *   level k (0-based, levels ascending) exactly when B > k. A square has segments only for the levels k with
 *   min(B) <= k < max(B) of its corners, so squares inside a band between two levels cost four loads and a compare.
 * - Open fragment ends can only lie on the front between visited and unvisited squares: the vertices on the two cell
 *   rows the current square row spans (one array per row parity and level) and the one vertical side between the
 *   current square and the next (one slot per level). Fragments are linked lists in a node pool (Int32Array), so
 *   extending, putting in front and joining cost O(1).
 * - Holes. A ring meets the line through the cell centres of row r only at its vertices on that line (midpoints
 *   between horizontally neighbouring cells with one above, one below), crossing it there; rings do not cross one
 *   another. Walking along that line from the left edge, the rings that contain the current point therefore form a
 *   stack (a crossed ring is entered when it is not on top, left when it is). At a vertex of a hole, the rings
 *   containing the hole are the others on the stack; the hole goes to the outer ring among them that closed first,
 *   which is d3-contour's rule without any polygon test. Only rows holding a vertex of some hole are walked.
 *
 * Vertex codes: (X, r + 0.5), between cells (r, X-1) and (r, X) of a row: r * (nx + 1) + X; (c + 0.5, Y), between
 * cells (Y-1, c) and (Y, c) of a column: ny * (nx + 1) + Y * nx + c (d3-contour's cell space: the value of cell
 * (row, col) sits at (col + 0.5, row + 0.5)).
 */
import type { Grid } from '../grid.js';
import { PiezomapError } from '../errors.js';

/**
 * The rings as traced, in closing order: level index, first node of the vertex chain, vertex count, whether it is an
 * outer ring, and the cell row of the square it closed in.
 */
interface RingStore {
  level: Int32Array<ArrayBuffer>;
  head: Int32Array<ArrayBuffer>;
  length: Int32Array<ArrayBuffer>;
  outer: Int32Array<ArrayBuffer>;
  row: Int32Array<ArrayBuffer>;
  count: number;
}

/**
 * The rings of each of `levels` (finite, strictly ascending), handed to `visit` level by level in d3-contour's
 * output order (see the file comment): `visit(k, codes, n)` gets the n vertex codes of one ring in `codes[0..n)`.
 */
export function traceRings(
  grid: Grid,
  values: Float64Array,
  levels: Float64Array,
  visit: (k: number, codes: Int32Array, n: number) => void,
): void {
  const { nx, ny } = grid;
  const K = levels.length;
  if (K === 0 || nx < 1 || ny < 1) return;
  const W = nx + 1;
  const hCount = ny * W;
  if (hCount + (ny + 1) * nx > 0x7fffffff) {
    throw new PiezomapError('internal', `contour tracing: a grid of ${nx} x ${ny} cells is too large for 32-bit vertex codes`);
  }
  for (let k = 1; k < K; k++) {
    if (!(levels[k - 1]! < levels[k]!)) throw new PiezomapError('internal', 'contour tracing: levels must be strictly ascending');
  }

  // Front: open fragment starts/ends at each vertex of the front, per level (-1: none). Horizontal-side vertices of
  // cell row r at ((r & 1) * K + k) * W + X; the vertical side between the current square and the next at 2KW + k.
  const frontSize = 2 * K * W + K;
  const vSlot0 = 2 * K * W;
  const startAt = new Int32Array(frontSize).fill(-1);
  const endAt = new Int32Array(frontSize).fill(-1);

  // Fragments (ids reused through a free list) and the node pool (never freed: rings keep their nodes).
  let fragCap = 256;
  let fragHead = new Int32Array(fragCap);
  let fragTail = new Int32Array(fragCap);
  let fragStartSlot = new Int32Array(fragCap);
  let fragEndSlot = new Int32Array(fragCap);
  let fragLen = new Int32Array(fragCap);
  let fragCount = 0;
  let freeFrags = new Int32Array(fragCap);
  let freeCount = 0;
  let nodeCap = 4096;
  let nodeCode = new Int32Array(nodeCap);
  let nodeNext = new Int32Array(nodeCap);
  let nodeCount = 0;
  const rings: RingStore = {
    level: new Int32Array(64),
    head: new Int32Array(64),
    length: new Int32Array(64),
    outer: new Int32Array(64),
    row: new Int32Array(64),
    count: 0,
  };

  const newNode = (code: number, next: number): number => {
    if (nodeCount === nodeCap) {
      nodeCap *= 2;
      nodeCode = grow(nodeCode, nodeCap);
      nodeNext = grow(nodeNext, nodeCap);
    }
    nodeCode[nodeCount] = code;
    nodeNext[nodeCount] = next;
    return nodeCount++;
  };
  const newFrag = (): number => {
    if (freeCount > 0) return freeFrags[--freeCount]!;
    if (fragCount === fragCap) {
      fragCap *= 2;
      fragHead = grow(fragHead, fragCap);
      fragTail = grow(fragTail, fragCap);
      fragStartSlot = grow(fragStartSlot, fragCap);
      fragEndSlot = grow(fragEndSlot, fragCap);
      fragLen = grow(fragLen, fragCap);
      freeFrags = grow(freeFrags, fragCap);
    }
    return fragCount++;
  };
  const freeFrag = (f: number): void => {
    freeFrags[freeCount++] = f;
  };
  /**
   * Fragment f of level k closed by the segment s -> e. That segment lies in the ring's last square in scan order, so
   * it joins the square's top and left sides (the bottom and right ones would continue in later squares), and the
   * square's bottom-right corner lies outside the ring (nothing of the ring is below or right of it). The cells above
   * the level lie on the same side of every segment, seen in its direction (d3-contour's table): for L -> T (cases 8
   * and 10) that side holds the top-left corner, inside the ring, so the ring bounds an above region from outside (an
   * outer ring: positive area in d3-contour's terms); for T -> L (case 7) it faces the outside: the ring is a hole.
   */
  const closeRing = (k: number, f: number, s: number, e: number): void => {
    if (rings.count === rings.level.length) {
      const cap = 2 * rings.count;
      rings.level = grow(rings.level, cap);
      rings.head = grow(rings.head, cap);
      rings.length = grow(rings.length, cap);
      rings.outer = grow(rings.outer, cap);
      rings.row = grow(rings.row, cap);
    }
    const outer = s >= hCount;
    rings.level[rings.count] = k;
    rings.head[rings.count] = fragHead[f]!;
    rings.length[rings.count] = fragLen[f]!;
    rings.outer[rings.count] = outer ? 1 : 0;
    rings.row[rings.count] = ((outer ? e : s) / W) | 0;
    rings.count++;
    freeFrag(f);
  };

  /**
   * Segment s -> e of level k (d3-contour's stitch). `sOld`/`eOld`: whether the vertex may already hold an open
   * fragment end (the top and left sides of the square; the bottom and right ones are new).
   */
  const stitch = (k: number, s: number, sSlot: number, sOld: boolean, e: number, eSlot: number, eOld: boolean): void => {
    const f = sOld ? endAt[sSlot]! : -1;
    if (f >= 0) {
      const g = eOld ? startAt[eSlot]! : -1;
      endAt[sSlot] = -1;
      if (g >= 0) {
        startAt[eSlot] = -1;
        if (f === g) {
          closeRing(k, f, s, e);
        } else {
          nodeNext[fragTail[f]!] = fragHead[g]!;
          fragTail[f] = fragTail[g]!;
          fragLen[f] = fragLen[f]! + fragLen[g]!;
          fragEndSlot[f] = fragEndSlot[g]!;
          endAt[fragEndSlot[g]!] = f;
          freeFrag(g);
        }
      } else {
        const node = newNode(e, -1);
        nodeNext[fragTail[f]!] = node;
        fragTail[f] = node;
        fragLen[f] = fragLen[f]! + 1;
        fragEndSlot[f] = eSlot;
        endAt[eSlot] = f;
      }
      return;
    }
    const g = eOld ? startAt[eSlot]! : -1;
    if (g >= 0) {
      startAt[eSlot] = -1;
      fragHead[g] = newNode(s, fragHead[g]!);
      fragLen[g] = fragLen[g]! + 1;
      fragStartSlot[g] = sSlot;
      startAt[sSlot] = g;
      return;
    }
    const h = newFrag();
    const tail = newNode(e, -1);
    fragHead[h] = newNode(s, tail);
    fragTail[h] = tail;
    fragLen[h] = 2;
    fragStartSlot[h] = sSlot;
    fragEndSlot[h] = eSlot;
    startAt[sSlot] = h;
    endAt[eSlot] = h;
  };

  // Buckets of two cell rows, padded with a 0 (below every level) at both ends: index i is column i - 1.
  let top = new Int32Array(nx + 2);
  let bottom = new Int32Array(nx + 2);
  for (let y = -1; y < ny; y++) {
    const swap = top;
    top = bottom;
    bottom = swap;
    if (y + 1 < ny) bucketRow(values, (y + 1) * nx, nx, levels, bottom);
    else bottom.fill(0);
    const topBase = (y & 1) * K * W;
    const bottomBase = ((y + 1) & 1) * K * W;
    // Corner buckets of square x = i - 1: b3 top left, b2 top right, b0 bottom left, b1 bottom right.
    let b3 = top[0]!;
    let b0 = bottom[0]!;
    for (let i = 0; i <= nx; i++) {
      const b2 = top[i + 1]!;
      const b1 = bottom[i + 1]!;
      // All four corners in one bucket: no level crosses the square (and the next square's left corners are these).
      if (b0 === b1 && b2 === b3 && b0 === b3) continue;
      const x = i - 1;
      let lo = b0 < b1 ? b0 : b1;
      let hi = b0 < b1 ? b1 : b0;
      const lo2 = b2 < b3 ? b2 : b3;
      const hi2 = b2 < b3 ? b3 : b2;
      if (lo2 < lo) lo = lo2;
      if (hi2 > hi) hi = hi2;
      // Vertex codes of the four sides (T, B: X = x + 1 on cell rows y, y + 1; L, R: columns x, x + 1 at Y = y + 1).
      const T = y * W + x + 1;
      const B = T + W;
      const L = hCount + (y + 1) * nx + x;
      const R = L + 1;
      for (let k = lo; k < hi; k++) {
        const tSlot = topBase + k * W + i;
        const bSlot = bottomBase + k * W + i;
        const vSlot = vSlot0 + k;
        const c = (b0 > k ? 1 : 0) | (b1 > k ? 2 : 0) | (b2 > k ? 4 : 0) | (b3 > k ? 8 : 0);
        // d3-contour's table of cases, segment by segment in its order.
        switch (c) {
          case 1:
            stitch(k, B, bSlot, false, L, vSlot, true);
            break;
          case 2:
            stitch(k, R, vSlot, false, B, bSlot, false);
            break;
          case 3:
            stitch(k, R, vSlot, false, L, vSlot, true);
            break;
          case 4:
            stitch(k, T, tSlot, true, R, vSlot, false);
            break;
          case 5:
            stitch(k, B, bSlot, false, L, vSlot, true);
            stitch(k, T, tSlot, true, R, vSlot, false);
            break;
          case 6:
            stitch(k, T, tSlot, true, B, bSlot, false);
            break;
          case 7:
            stitch(k, T, tSlot, true, L, vSlot, true);
            break;
          case 8:
            stitch(k, L, vSlot, true, T, tSlot, true);
            break;
          case 9:
            stitch(k, B, bSlot, false, T, tSlot, true);
            break;
          case 10:
            stitch(k, L, vSlot, true, T, tSlot, true);
            stitch(k, R, vSlot, false, B, bSlot, false);
            break;
          case 11:
            stitch(k, R, vSlot, false, T, tSlot, true);
            break;
          case 12:
            stitch(k, L, vSlot, true, R, vSlot, false);
            break;
          case 13:
            stitch(k, B, bSlot, false, R, vSlot, false);
            break;
          case 14:
            stitch(k, L, vSlot, true, B, bSlot, false);
            break;
        }
      }
      b3 = b2;
      b0 = b1;
    }
  }
  if (fragCount - freeCount !== 0) {
    throw new PiezomapError('internal', `contour tracing: ${fragCount - freeCount} line pieces left open`);
  }

  emitInOrder(grid, values, levels, rings, nodeCode, nodeNext, visit);
}

/**
 * Buckets of one cell row into out[1..nx]: the number of levels <= value (0 for NaN). A cell in the same bucket as its
 * left neighbour (the usual case) costs two comparisons; others a binary search.
 */
function bucketRow(values: Float64Array, base: number, nx: number, levels: Float64Array, out: Int32Array): void {
  const K = levels.length;
  const first = levels[0]!;
  let b = 0;
  // Bucket b holds lower <= v < upper.
  let lower = -Infinity;
  let upper = first;
  for (let j = 0; j < nx; j++) {
    const v = values[base + j]!;
    if (!(v >= lower && v < upper)) {
      if (!(v >= first)) {
        b = 0;
      } else {
        // levels[lo - 1] <= v < levels[hi]: find the first level > v.
        let lo = 1;
        let hi = K;
        while (lo < hi) {
          const mid = (lo + hi) >>> 1;
          if (levels[mid]! <= v) lo = mid + 1;
          else hi = mid;
        }
        b = lo;
      }
      lower = b > 0 ? levels[b - 1]! : -Infinity;
      upper = b < K ? levels[b]! : Infinity;
    }
    out[j + 1] = b;
  }
}

/**
 * Each level's rings in d3-contour's output order: outer rings (positive area) in closing order, each followed by
 * its holes in closing order (file comment).
 */
function emitInOrder(
  grid: Grid,
  values: Float64Array,
  levels: Float64Array,
  rings: RingStore,
  nodeCode: Int32Array,
  nodeNext: Int32Array,
  visit: (k: number, codes: Int32Array, n: number) => void,
): void {
  const { nx, ny } = grid;
  const K = levels.length;
  const W = nx + 1;
  const hCount = ny * W;
  const count = rings.count;
  // Rings of each level, in closing order (a stable counting sort by level).
  const levelStart = new Int32Array(K + 1);
  for (let r = 0; r < count; r++) {
    const k = rings.level[r]! + 1;
    levelStart[k] = levelStart[k]! + 1;
  }
  for (let k = 0; k < K; k++) levelStart[k + 1] = levelStart[k + 1]! + levelStart[k]!;
  const order = new Int32Array(count);
  const fill = levelStart.slice(0, K);
  for (let r = 0; r < count; r++) {
    const k = rings.level[r]!;
    order[fill[k]!] = r;
    fill[k] = fill[k]! + 1;
  }

  let maxLength = 0;
  for (let r = 0; r < count; r++) if (rings.length[r]! > maxLength) maxLength = rings.length[r]!;
  const codes = new Int32Array(maxLength);
  const outer = rings.outer;
  const parent = new Int32Array(count).fill(-1);
  const firstChild = new Int32Array(count).fill(-1);
  const lastChild = new Int32Array(count).fill(-1);
  const nextSibling = new Int32Array(count).fill(-1);
  const needsParent = new Uint8Array(count);
  const rowSlot = new Int32Array(ny).fill(-1);
  let rowRing = new Int32Array(0);
  const stack = new Int32Array(count);
  const onStack = new Uint8Array(count);

  for (let k = 0; k < K; k++) {
    const from = levelStart[k]!;
    const to = levelStart[k + 1]!;
    if (from === to) continue;
    // Holes that give a line need their outer ring; the others (around inactive cells) give nothing, wherever they go.
    let holes = 0;
    for (let q = from; q < to; q++) {
      const r = order[q]!;
      if (!outer[r] && hasGenuineVertex(r)) {
        needsParent[r] = 1;
        holes++;
      }
    }
    if (holes > 0) findParents(k, from, to);
    // Output: outer rings in closing order, each followed by its holes.
    for (let q = from; q < to; q++) {
      const r = order[q]!;
      if (!outer[r]) continue;
      visitRing(k, r);
      for (let h = firstChild[r]!; h >= 0; h = nextSibling[h]!) visitRing(k, h);
    }
  }

  /** Whether ring r has a vertex between two active cells (see placeVertex in contours.ts). */
  function hasGenuineVertex(r: number): boolean {
    for (let node = rings.head[r]!; node >= 0; node = nodeNext[node]!) {
      const code = nodeCode[node]!;
      if (code < hCount) {
        const row = (code / W) | 0;
        const X = code - row * W;
        if (X > 0 && X < nx && Number.isFinite(values[row * nx + X - 1]!) && Number.isFinite(values[row * nx + X]!)) return true;
      } else {
        const v = code - hCount;
        const Y = (v / nx) | 0;
        const col = v - Y * nx;
        if (Y > 0 && Y < ny && Number.isFinite(values[(Y - 1) * nx + col]!) && Number.isFinite(values[Y * nx + col]!)) return true;
      }
    }
    return false;
  }

  function visitRing(k: number, r: number): void {
    let n = 0;
    for (let node = rings.head[r]!; node >= 0; node = nodeNext[node]!) codes[n++] = nodeCode[node]!;
    visit(k, codes, n);
  }

  /** The parent of each hole of level k (rings order[from..to)), by walking the rows that hold a hole vertex. */
  function findParents(k: number, from: number, to: number): void {
    const level = levels[k]!;
    const rows: number[] = [];
    const pending: number[] = [];
    for (let q = from; q < to; q++) {
      const r = order[q]!;
      if (!needsParent[r]) continue;
      const row = rings.row[r]!;
      if (rowSlot[row]! < 0) {
        rowSlot[row] = rows.length;
        rows.push(row);
        pending.push(0);
      }
      pending[rowSlot[row]!]!++;
    }
    if (rowRing.length < rows.length * W) rowRing = new Int32Array(rows.length * W);
    // Which ring each vertex on those rows belongs to.
    for (let q = from; q < to; q++) {
      const r = order[q]!;
      for (let node = rings.head[r]!; node >= 0; node = nodeNext[node]!) {
        const code = nodeCode[node]!;
        if (code >= hCount) continue;
        const rr = (code / W) | 0;
        const slot = rowSlot[rr]!;
        if (slot >= 0) rowRing[slot * W + code - rr * W] = r;
      }
    }
    for (const row of rows) {
      const slot = rowSlot[row]!;
      let depth = 0;
      let left = false;
      let unresolved = pending[slot]!;
      for (let X = 0; X <= nx && unresolved > 0; X++) {
        const right = X < nx && values[row * nx + X]! >= level;
        if (right === left) continue;
        left = right;
        const r = rowRing[slot * W + X]!;
        if (depth > 0 && stack[depth - 1] === r) {
          depth--;
          onStack[r] = 0;
        } else {
          if (onStack[r]) throw new PiezomapError('internal', 'contour tracing: rings cross the row of a hole out of order');
          stack[depth++] = r;
          onStack[r] = 1;
        }
        if (needsParent[r] && parent[r]! < 0) {
          // The rings containing this hole are the others on the stack; the outer ring among them that closed first.
          let best = -1;
          for (let d = 0; d < depth; d++) {
            const s = stack[d]!;
            if (s !== r && outer[s] && (best < 0 || s < best)) best = s;
          }
          if (best < 0) throw new PiezomapError('internal', 'contour tracing: a hole lies in no outer ring');
          parent[r] = best;
          // A hole of this row is resolved here; one from another row may be met too, and is resolved as well.
          if (rings.row[r] === row) unresolved--;
        }
      }
      for (let d = 0; d < depth; d++) onStack[stack[d]!] = 0;
      rowSlot[row] = -1;
    }
    for (let q = from; q < to; q++) {
      const h = order[q]!;
      if (!needsParent[h]) continue;
      const p = parent[h]!;
      if (p < 0) throw new PiezomapError('internal', 'contour tracing: a hole without an outer ring');
      if (firstChild[p]! < 0) firstChild[p] = h;
      else nextSibling[lastChild[p]!] = h;
      lastChild[p] = h;
    }
  }
}

function grow(a: Int32Array<ArrayBuffer>, size: number): Int32Array<ArrayBuffer> {
  const b = new Int32Array(size);
  b.set(a.subarray(0, Math.min(a.length, size)));
  return b;
}
