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
 *   a hole goes to the first outer ring, in closing order, that contains it. We tell outer rings from holes by the
 *   segment that closes them (Scanner.closeRing), without the area.
 *
 * What we do instead of d3-contour's work per level (a pass over the grid per level, arrays of point arrays, a
 * point-in-polygon test of every hole against the outer rings):
 *
 * - One pass for all levels. Every cell gets its bucket B = the number of levels <= value (0 for NaN); a cell is above
 *   level k (0-based, levels ascending) exactly when B > k. A square has segments only for the levels k with
 *   min(B) <= k < max(B) of its corners; a square inside a band between two levels costs two loads (its left corners
 *   are the last square's right ones) and three comparisons.
 * - Open fragment ends can only lie on the front between visited and unvisited squares: the vertices on the two cell
 *   rows the current square row spans (one array per row parity and level) and the one vertical side between the
 *   current square and the next (one slot per level). Fragments are linked lists in a node pool (Int32Array), so
 *   extending, putting in front and joining cost O(1).
 * - Holes. A ring meets the line through the cell centres of row r only at its vertices on that line (midpoints
 *   between horizontally neighbouring cells with one above, one below), crossing it there; rings do not cross one
 *   another. Walking along that line from the left edge, the rings that contain the current point therefore form a
 *   stack (a crossed ring is entered when it is not on top, left when it is). At a vertex of a hole, the rings
 *   containing the hole are the others on the stack; the hole goes to the outer ring among them that closed first,
 *   which is d3-contour's rule without any polygon test. Only rows holding a vertex of some hole are walked, and
 *   only for holes with a vertex between two active cells: the others (round inactive cells) give no line, so where
 *   they would go does not matter, and they are left out.
 *
 * Vertex codes: (X, r + 0.5), between cells (r, X-1) and (r, X) of a row: r * (nx + 1) + X; (c + 0.5, Y), between
 * cells (Y-1, c) and (Y, c) of a column: ny * (nx + 1) + Y * nx + c (d3-contour's cell space: the value of cell
 * (row, col) sits at (col + 0.5, row + 0.5)).
 */
import type { Grid } from '../grid.js';
import { PiezomapError } from '../errors.js';

/** The rings of a trace, level by level in d3-contour's output order, as chains of vertex codes. */
export interface TracedRings {
  /** The rings of level k are order[levelStart[k]] .. order[levelStart[k + 1] - 1], in output order. */
  levelStart: Int32Array;
  order: Int32Array;
  /** Per ring: first node of its vertex chain and vertex count. */
  head: Int32Array;
  length: Int32Array;
  /** Per node: vertex code and next node (-1 at the end). */
  nodeCode: Int32Array;
  nodeNext: Int32Array;
  /** The longest ring's vertex count. */
  maxLength: number;
}

/**
 * The rings of each of `levels` (finite, strictly ascending) in d3-contour's output order (see the file comment);
 * rings that give no line at all may be left out.
 */
export function traceRings(grid: Grid, values: Float64Array, levels: Float64Array): TracedRings {
  const { nx, ny } = grid;
  const K = levels.length;
  if ((ny + 1) * (nx + 1) * 2 > 0x7fffffff) {
    throw new PiezomapError('internal', `contour tracing: a grid of ${nx} x ${ny} cells is too large for 32-bit vertex codes`);
  }
  for (let k = 1; k < K; k++) {
    if (!(levels[k - 1]! < levels[k]!)) throw new PiezomapError('internal', 'contour tracing: levels must be strictly ascending');
  }
  const scanner = new Scanner(nx, ny, K);
  if (K > 0 && nx > 0 && ny > 0) scan(scanner, values, levels);
  return orderRings(scanner, values, levels);
}

/**
 * Stitching state of a scan (d3-contour's fragments and rings) on typed arrays that grow as needed. One class, its
 * methods on the prototype: the engine compiles them once for every trace.
 */
class Scanner {
  readonly nx: number;
  readonly ny: number;
  readonly K: number;
  /** Row length of the horizontal-side vertex codes (nx + 1) and their count (codes below it are horizontal). */
  readonly W: number;
  readonly hCount: number;
  /**
   * The front: open fragment starting/ending at each vertex of it, per level (-1: none). Horizontal-side vertices
   * of cell row r at ((r & 1) * K + k) * W + X; the vertical side between the current square and the next at
   * 2KW + k.
   */
  readonly startAt: Int32Array;
  readonly endAt: Int32Array;
  readonly vSlot0: number;
  // Fragments, their ids reused through a free list.
  fragHead = new Int32Array(256);
  fragTail = new Int32Array(256);
  fragStartSlot = new Int32Array(256);
  fragEndSlot = new Int32Array(256);
  fragLen = new Int32Array(256);
  fragCount = 0;
  freeFrags = new Int32Array(256);
  freeCount = 0;
  // Nodes of vertex chains (never freed: rings keep theirs).
  nodeCode = new Int32Array(4096);
  nodeNext = new Int32Array(4096);
  nodeCount = 0;
  // Rings in closing order: level index, first node, vertex count, outer ring (1) or hole (0), cell row it closed on.
  ringLevel = new Int32Array(64);
  ringHead = new Int32Array(64);
  ringLength = new Int32Array(64);
  ringOuter = new Uint8Array(64);
  ringRow = new Int32Array(64);
  ringCount = 0;

  constructor(nx: number, ny: number, K: number) {
    this.nx = nx;
    this.ny = ny;
    this.K = K;
    this.W = nx + 1;
    this.hCount = ny * this.W;
    this.vSlot0 = 2 * K * this.W;
    this.startAt = new Int32Array(this.vSlot0 + K).fill(-1);
    this.endAt = new Int32Array(this.vSlot0 + K).fill(-1);
  }

  newNode(code: number, next: number): number {
    if (this.nodeCount === this.nodeCode.length) {
      this.nodeCode = grow(this.nodeCode);
      this.nodeNext = grow(this.nodeNext);
    }
    const node = this.nodeCount++;
    this.nodeCode[node] = code;
    this.nodeNext[node] = next;
    return node;
  }

  newFrag(): number {
    if (this.freeCount > 0) return this.freeFrags[--this.freeCount]!;
    if (this.fragCount === this.fragHead.length) {
      this.fragHead = grow(this.fragHead);
      this.fragTail = grow(this.fragTail);
      this.fragStartSlot = grow(this.fragStartSlot);
      this.fragEndSlot = grow(this.fragEndSlot);
      this.fragLen = grow(this.fragLen);
      this.freeFrags = grow(this.freeFrags);
    }
    return this.fragCount++;
  }

  /**
   * Fragment f of level k closed by the segment s -> e. That segment lies in the ring's last square in scan order, so
   * it joins the square's top and left sides (the bottom and right ones would continue in later squares), and the
   * square's bottom-right corner lies outside the ring (nothing of the ring is below or right of it). The cells above
   * the level lie on the same side of every segment, seen in its direction (d3-contour's table): for L -> T (cases 8
   * and 10) that side holds the top-left corner, inside the ring, so the ring bounds an above region from outside (an
   * outer ring: positive area in d3-contour's terms); for T -> L (case 7) it faces the outside: the ring is a hole.
   */
  closeRing(k: number, f: number, s: number, e: number): void {
    const r = this.ringCount;
    if (r === this.ringLevel.length) {
      this.ringLevel = grow(this.ringLevel);
      this.ringHead = grow(this.ringHead);
      this.ringLength = grow(this.ringLength);
      this.ringRow = grow(this.ringRow);
      const outer = new Uint8Array(2 * r);
      outer.set(this.ringOuter);
      this.ringOuter = outer;
    }
    const isOuter = s >= this.hCount;
    this.ringLevel[r] = k;
    this.ringHead[r] = this.fragHead[f]!;
    this.ringLength[r] = this.fragLen[f]!;
    this.ringOuter[r] = isOuter ? 1 : 0;
    // The square's top-side vertex lies on the cell row the ring closed on.
    this.ringRow[r] = ((isOuter ? e : s) / this.W) | 0;
    this.ringCount = r + 1;
    this.freeFrags[this.freeCount++] = f;
  }

  /**
   * Segment s -> e of level k (d3-contour's stitch). `sOld`/`eOld`: whether the vertex may already hold an open
   * fragment end (the top and left sides of the square; the bottom and right ones are new). The slots are the
   * vertices' places on the front.
   */
  stitch(k: number, s: number, sSlot: number, sOld: boolean, e: number, eSlot: number, eOld: boolean): void {
    const { startAt, endAt } = this;
    const f = sOld ? endAt[sSlot]! : -1;
    if (f >= 0) {
      const g = eOld ? startAt[eSlot]! : -1;
      endAt[sSlot] = -1;
      if (g >= 0) {
        startAt[eSlot] = -1;
        if (f === g) {
          this.closeRing(k, f, s, e);
        } else {
          // f, then g.
          this.nodeNext[this.fragTail[f]!] = this.fragHead[g]!;
          this.fragTail[f] = this.fragTail[g]!;
          this.fragLen[f] = this.fragLen[f]! + this.fragLen[g]!;
          const gEnd = this.fragEndSlot[g]!;
          this.fragEndSlot[f] = gEnd;
          endAt[gEnd] = f;
          this.freeFrags[this.freeCount++] = g;
        }
      } else {
        const node = this.newNode(e, -1);
        this.nodeNext[this.fragTail[f]!] = node;
        this.fragTail[f] = node;
        this.fragLen[f] = this.fragLen[f]! + 1;
        this.fragEndSlot[f] = eSlot;
        endAt[eSlot] = f;
      }
      return;
    }
    const g = eOld ? startAt[eSlot]! : -1;
    if (g >= 0) {
      startAt[eSlot] = -1;
      this.fragHead[g] = this.newNode(s, this.fragHead[g]!);
      this.fragLen[g] = this.fragLen[g]! + 1;
      this.fragStartSlot[g] = sSlot;
      startAt[sSlot] = g;
      return;
    }
    const h = this.newFrag();
    const tail = this.newNode(e, -1);
    this.fragHead[h] = this.newNode(s, tail);
    this.fragTail[h] = tail;
    this.fragLen[h] = 2;
    this.fragStartSlot[h] = sSlot;
    this.fragEndSlot[h] = eSlot;
    startAt[sSlot] = h;
    endAt[eSlot] = h;
  }
}

/** The pass over the squares of the padded grid, row by row, every level at once. */
function scan(sc: Scanner, values: Float64Array, levels: Float64Array): void {
  const { nx, ny, K, W, hCount, vSlot0 } = sc;
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
            sc.stitch(k, B, bSlot, false, L, vSlot, true);
            break;
          case 2:
            sc.stitch(k, R, vSlot, false, B, bSlot, false);
            break;
          case 3:
            sc.stitch(k, R, vSlot, false, L, vSlot, true);
            break;
          case 4:
            sc.stitch(k, T, tSlot, true, R, vSlot, false);
            break;
          case 5:
            sc.stitch(k, B, bSlot, false, L, vSlot, true);
            sc.stitch(k, T, tSlot, true, R, vSlot, false);
            break;
          case 6:
            sc.stitch(k, T, tSlot, true, B, bSlot, false);
            break;
          case 7:
            sc.stitch(k, T, tSlot, true, L, vSlot, true);
            break;
          case 8:
            sc.stitch(k, L, vSlot, true, T, tSlot, true);
            break;
          case 9:
            sc.stitch(k, B, bSlot, false, T, tSlot, true);
            break;
          case 10:
            sc.stitch(k, L, vSlot, true, T, tSlot, true);
            sc.stitch(k, R, vSlot, false, B, bSlot, false);
            break;
          case 11:
            sc.stitch(k, R, vSlot, false, T, tSlot, true);
            break;
          case 12:
            sc.stitch(k, L, vSlot, true, R, vSlot, false);
            break;
          case 13:
            sc.stitch(k, B, bSlot, false, R, vSlot, false);
            break;
          case 14:
            sc.stitch(k, L, vSlot, true, B, bSlot, false);
            break;
        }
      }
      b3 = b2;
      b0 = b1;
    }
  }
  if (sc.fragCount !== sc.freeCount) {
    throw new PiezomapError('internal', `contour tracing: ${sc.fragCount - sc.freeCount} line pieces left open`);
  }
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
 * Each level's rings in d3-contour's output order: outer rings in closing order, each followed by its holes in
 * closing order (file comment); holes that give no line are left out.
 */
function orderRings(sc: Scanner, values: Float64Array, levels: Float64Array): TracedRings {
  const { K, ringCount: count } = sc;
  // Rings of each level, in closing order (a stable counting sort by level).
  const levelStart = new Int32Array(K + 1);
  for (let r = 0; r < count; r++) {
    const k = sc.ringLevel[r]! + 1;
    levelStart[k] = levelStart[k]! + 1;
  }
  for (let k = 0; k < K; k++) levelStart[k + 1] = levelStart[k + 1]! + levelStart[k]!;
  const byLevel = new Int32Array(count);
  const fill = levelStart.slice(0, K);
  for (let r = 0; r < count; r++) {
    const k = sc.ringLevel[r]!;
    byLevel[fill[k]!] = r;
    fill[k] = fill[k]! + 1;
  }

  const parents = new HoleParents(sc, count);
  const order = new Int32Array(count);
  const outStart = new Int32Array(K + 1);
  let n = 0;
  let maxLength = 0;
  for (let k = 0; k < K; k++) {
    outStart[k] = n;
    const from = levelStart[k]!;
    const to = levelStart[k + 1]!;
    if (from === to) continue;
    // Holes that give a line need their outer ring; the others (round inactive cells) give nothing, wherever they go.
    let holes = 0;
    for (let q = from; q < to; q++) {
      const r = byLevel[q]!;
      if (!sc.ringOuter[r] && hasGenuineVertex(sc, values, r)) {
        parents.needed[r] = 1;
        holes++;
      }
    }
    if (holes > 0) parents.find(values, levels[k]!, byLevel, from, to);
    for (let q = from; q < to; q++) {
      const r = byLevel[q]!;
      if (!sc.ringOuter[r]) continue;
      order[n++] = r;
      if (sc.ringLength[r]! > maxLength) maxLength = sc.ringLength[r]!;
      for (let h = parents.firstChild[r]!; h >= 0; h = parents.nextSibling[h]!) {
        order[n++] = h;
        if (sc.ringLength[h]! > maxLength) maxLength = sc.ringLength[h]!;
      }
    }
  }
  outStart[K] = n;
  return {
    levelStart: outStart,
    order,
    head: sc.ringHead,
    length: sc.ringLength,
    nodeCode: sc.nodeCode,
    nodeNext: sc.nodeNext,
    maxLength,
  };
}

/** Whether ring r has a vertex between two active cells (see placeVertex in contours.ts). */
function hasGenuineVertex(sc: Scanner, values: Float64Array, r: number): boolean {
  const { nx, ny, W, hCount, nodeCode, nodeNext } = sc;
  for (let node = sc.ringHead[r]!; node >= 0; node = nodeNext[node]!) {
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

/** Holes and their outer rings: which holes need one, and the holes of each outer ring as a list in closing order. */
class HoleParents {
  readonly sc: Scanner;
  readonly needed: Uint8Array;
  readonly parent: Int32Array;
  readonly firstChild: Int32Array;
  readonly lastChild: Int32Array;
  readonly nextSibling: Int32Array;
  readonly rowSlot: Int32Array;
  rowRing = new Int32Array(0);
  readonly stack: Int32Array;
  readonly onStack: Uint8Array;

  constructor(sc: Scanner, count: number) {
    this.sc = sc;
    this.needed = new Uint8Array(count);
    this.parent = new Int32Array(count).fill(-1);
    this.firstChild = new Int32Array(count).fill(-1);
    this.lastChild = new Int32Array(count).fill(-1);
    this.nextSibling = new Int32Array(count).fill(-1);
    this.rowSlot = new Int32Array(sc.ny).fill(-1);
    this.stack = new Int32Array(count);
    this.onStack = new Uint8Array(count);
  }

  /**
   * The outer ring of each needed hole among the rings byLevel[from..to) of one level, by walking the cell rows the
   * holes closed on (file comment).
   */
  find(values: Float64Array, level: number, byLevel: Int32Array, from: number, to: number): void {
    const { sc, needed, parent, rowSlot, stack, onStack } = this;
    const { nx, W, hCount, nodeCode, nodeNext } = sc;
    const rows: number[] = [];
    const pending: number[] = [];
    for (let q = from; q < to; q++) {
      const r = byLevel[q]!;
      if (!needed[r]) continue;
      const row = sc.ringRow[r]!;
      if (rowSlot[row]! < 0) {
        rowSlot[row] = rows.length;
        rows.push(row);
        pending.push(0);
      }
      pending[rowSlot[row]!]!++;
    }
    if (this.rowRing.length < rows.length * W) this.rowRing = new Int32Array(rows.length * W);
    const rowRing = this.rowRing;
    // Which ring each vertex on those rows belongs to.
    for (let q = from; q < to; q++) {
      const r = byLevel[q]!;
      for (let node = sc.ringHead[r]!; node >= 0; node = nodeNext[node]!) {
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
        // A vertex of ring r: entered when r is not on top of the stack, left when it is.
        const r = rowRing[slot * W + X]!;
        if (depth > 0 && stack[depth - 1] === r) {
          depth--;
          onStack[r] = 0;
        } else {
          if (onStack[r]) throw new PiezomapError('internal', 'contour tracing: rings cross the row of a hole out of order');
          stack[depth++] = r;
          onStack[r] = 1;
        }
        if (needed[r] && parent[r]! < 0) {
          // The rings containing this hole are the others on the stack; the outer ring among them that closed first.
          let best = -1;
          for (let d = 0; d < depth; d++) {
            const s = stack[d]!;
            if (s !== r && sc.ringOuter[s] && (best < 0 || s < best)) best = s;
          }
          if (best < 0) throw new PiezomapError('internal', 'contour tracing: a hole lies in no outer ring');
          parent[r] = best;
          // A hole of this row is resolved here; one of another row may be met too, and is resolved as well.
          if (sc.ringRow[r] === row) unresolved--;
        }
      }
      for (let d = 0; d < depth; d++) onStack[stack[d]!] = 0;
      rowSlot[row] = -1;
    }
    for (let q = from; q < to; q++) {
      const h = byLevel[q]!;
      if (!needed[h]) continue;
      const p = parent[h]!;
      if (p < 0) throw new PiezomapError('internal', 'contour tracing: a hole without an outer ring');
      if (this.firstChild[p]! < 0) this.firstChild[p] = h;
      else this.nextSibling[this.lastChild[p]!] = h;
      this.lastChild[p] = h;
    }
  }
}

/** A copy of `a` twice as long. */
function grow<T extends Int32Array>(a: T): T {
  const b = new Int32Array(2 * a.length);
  b.set(a);
  return b as T;
}
