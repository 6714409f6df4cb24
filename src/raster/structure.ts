/**
 * Where a TIFF keeps its own structure: the header, each image file directory (IFD) and the tag values stored
 * outside it (TIFF 6.0 section 2; BigTIFF as libtiff defines it: 16-byte header, 8-byte counts and offsets).
 * The reader checks image blocks against these ranges, so that a block offset pointing into the structure (or into
 * another block) is refused as damage instead of being decoded into plausible values.
 *
 * Pure: works on the file's bytes; problems it cannot resolve (an IFD outside the file) are left to the TIFF parser.
 */

/** A byte range [start, end) of the file and what it holds, in words for messages. */
export interface ByteRange {
  start: number;
  end: number;
  what: string;
  /** The header or an IFD's entry table ('table'), or a tag's values stored apart ('values'). */
  kind: 'table' | 'values';
}

/** Bytes per value of each TIFF field type (TIFF 6.0 section 2; 16-18 are BigTIFF's 8-byte types). */
const TYPE_SIZES: ReadonlyMap<number, number> = new Map([
  [1, 1],
  [2, 1],
  [3, 2],
  [4, 4],
  [5, 8],
  [6, 1],
  [7, 1],
  [8, 2],
  [9, 4],
  [10, 8],
  [11, 4],
  [12, 8],
  [13, 4],
  [16, 8],
  [17, 8],
  [18, 8],
]);

/** IFD chains longer than this are treated as damage (a loop the visited-set check would also catch, or junk). */
const MAX_IFDS = 65536;

export interface TiffStructure {
  /** The header, every IFD of the main chain (entry table and next-IFD pointer), every tag value stored outside its entry. */
  ranges: ByteRange[];
  /** How many IFDs the main chain holds (up to the first one outside the file). */
  ifdCount: number;
  /** The chain points back to an IFD already visited, or its IFDs overlap one another (damage). */
  loops: boolean;
}

/** Walk the main IFD chain. Stops at the first IFD that lies outside the file or was seen before. */
export function tiffStructure(bytes: Uint8Array): TiffStructure {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const little = bytes[0] === 0x49;
  const big = view.getUint16(2, little) === 43;
  const ranges: ByteRange[] = [{ start: 0, end: big ? 16 : 8, what: 'the TIFF header', kind: 'table' }];
  const size = bytes.length;
  const offsetAt = (at: number): number => (big ? Number(view.getBigUint64(at, little)) : view.getUint32(at, little));
  let ifd = big ? (size >= 16 ? offsetAt(8) : 0) : offsetAt(4);
  const seen = new Set<number>();
  // IFD tables that lie apart cannot add up to more than the file: more means overlapping tables (damage), and
  // stopping there bounds the walk on a hostile file
  let tableBytes = 0;
  let index = 0;
  for (; ifd > 0 && index < MAX_IFDS && !seen.has(ifd); index++) {
    seen.add(ifd);
    const countBytes = big ? 8 : 2;
    if (ifd + countBytes > size) return { ranges, ifdCount: index, loops: false };
    const entries = big ? Number(view.getBigUint64(ifd, little)) : view.getUint16(ifd, little);
    const entryBytes = big ? 20 : 12;
    const end = ifd + countBytes + entries * entryBytes + (big ? 8 : 4);
    if (end > size) return { ranges, ifdCount: index, loops: false };
    tableBytes += end - ifd;
    if (tableBytes > size) return { ranges, ifdCount: index, loops: true };
    ranges.push({ start: ifd, end, what: `the image file directory ${index}`, kind: 'table' });
    const inline = big ? 8 : 4;
    for (let k = 0; k < entries; k++) {
      const at = ifd + countBytes + k * entryBytes;
      const tag = view.getUint16(at, little);
      const typeSize = TYPE_SIZES.get(view.getUint16(at + 2, little));
      const count = big ? Number(view.getBigUint64(at + 4, little)) : view.getUint32(at + 4, little);
      if (typeSize === undefined) continue;
      const length = count * typeSize;
      if (length <= inline) continue;
      const start = offsetAt(at + (big ? 12 : 8));
      ranges.push({
        start,
        end: Math.min(start + length, size),
        what: `the values of tag ${tag} (image file directory ${index})`,
        kind: 'values',
      });
    }
    ifd = offsetAt(end - (big ? 8 : 4));
  }
  return { ranges, ifdCount: index, loops: ifd > 0 && (seen.has(ifd) || index >= MAX_IFDS) };
}

/**
 * The first block that overlaps the file's structure or another block, and what it overlaps; null when every block
 * lies apart. Blocks are given as byte offsets and counts (count 0 = missing block, skipped) and named on demand by
 * `nameOf`. One sweep over all ranges in start order, keeping the furthest-reaching block and structure range seen.
 */
export function findBlockOverlap(
  structure: ByteRange[],
  offsets: ArrayLike<number>,
  counts: ArrayLike<number>,
  nameOf: (block: number) => string,
): { block: string; overlaps: string } | null {
  // items 0..S-1 are structure ranges, S.. are blocks
  const s = structure.length;
  const n = s + offsets.length;
  const start = new Float64Array(n);
  const end = new Float64Array(n);
  structure.forEach((r, i) => {
    start[i] = r.start;
    end[i] = r.end;
  });
  for (let b = 0; b < offsets.length; b++) {
    start[s + b] = offsets[b]!;
    end[s + b] = offsets[b]! + counts[b]!;
  }
  const order = new Int32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  // at equal starts, structure first (lower index), so that a block starting at a structure range is named with it
  order.sort((a, b) => start[a]! - start[b]! || a - b);
  const name = (i: number) => (i < s ? structure[i]!.what : nameOf(i - s));
  let blockReach = -1;
  let structureReach = -1;
  for (let k = 0; k < n; k++) {
    const i = order[k]!;
    if (!(end[i]! > start[i]!)) continue; // empty: a missing block or an empty value
    if (i >= s) {
      if (structureReach >= 0 && start[i]! < end[structureReach]!) return { block: name(i), overlaps: name(structureReach) };
      if (blockReach >= 0 && start[i]! < end[blockReach]!) return { block: name(i), overlaps: name(blockReach) };
      if (blockReach < 0 || end[i]! > end[blockReach]!) blockReach = i;
    } else {
      if (blockReach >= 0 && start[i]! < end[blockReach]!) return { block: name(blockReach), overlaps: name(i) };
      if (structureReach < 0 || end[i]! > end[structureReach]!) structureReach = i;
    }
  }
  return null;
}

/**
 * The first tag value range that overlaps the header or an IFD's entry table, with what it overlaps; null when none
 * does. Such values would be read from the structure's own bytes (e.g. a tie point made of IFD entries). Values
 * overlapping each other are left alone: some writers share one array between tags.
 */
export function findValueOverlap(structure: ByteRange[]): { values: string; overlaps: string } | null {
  const sorted = structure.filter((r) => r.end > r.start).sort((a, b) => a.start - b.start || (a.kind === 'table' ? -1 : 1));
  let tableReach: ByteRange | null = null;
  let valueReach: ByteRange | null = null;
  for (const r of sorted) {
    if (r.kind === 'values') {
      if (tableReach && r.start < tableReach.end) return { values: r.what, overlaps: tableReach.what };
      if (!valueReach || r.end > valueReach.end) valueReach = r;
    } else {
      if (valueReach && r.start < valueReach.end) return { values: valueReach.what, overlaps: r.what };
      if (!tableReach || r.end > tableReach.end) tableReach = r;
    }
  }
  return null;
}
