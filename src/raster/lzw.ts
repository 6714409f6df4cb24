/**
 * TIFF LZW decoding (TIFF 6.0, section 13): codes of 9 to 12 bits, most significant bit first; 256 clears the
 * table, 257 ends the strip; the code width grows one code early, as libtiff writes it. Our own because the
 * geotiff.js decoder can follow a damaged table round in a cycle and grow its output until the process dies.
 * Here the output is bounded by the block size and every code is checked against the table before use.
 */

const CLEAR = 256;
const END = 257;
const FIRST_FREE = 258;
const TABLE_SIZE = 4096;

/** Tables allocated once and reused for every block. */
const prefix = new Int32Array(TABLE_SIZE);
const lastByte = new Uint8Array(TABLE_SIZE);
const firstByte = new Uint8Array(TABLE_SIZE);
const length = new Int32Array(TABLE_SIZE);
for (let i = 0; i < 256; i++) {
  prefix[i] = -1;
  lastByte[i] = i;
  firstByte[i] = i;
  length[i] = 1;
}

/**
 * Decode one LZW-compressed block into at most `maxBytes` bytes. Throws a plain Error describing the damage (the
 * caller names the file and block). A stream that ends without its end code is accepted only if it filled the block.
 */
export function decodeLzw(data: Uint8Array, maxBytes: number): Uint8Array {
  const out = new Uint8Array(maxBytes);
  const totalBits = data.length * 8;
  let bit = 0;
  let width = 9;
  let next = FIRST_FREE;
  let previous = -1;
  let written = 0;
  for (;;) {
    if (bit + width > totalBits) {
      if (written === maxBytes) break;
      throw new Error(`the LZW data ends after ${written} of ${maxBytes} bytes without its end code`);
    }
    const byte = bit >>> 3;
    const three = (data[byte]! << 16) | ((data[byte + 1] ?? 0) << 8) | (data[byte + 2] ?? 0);
    const code = (three >>> (24 - (bit & 7) - width)) & ((1 << width) - 1);
    bit += width;
    if (code === END) break;
    if (code === CLEAR) {
      next = FIRST_FREE;
      width = 9;
      previous = -1;
      continue;
    }
    let emit: number;
    let extra = -1;
    if (previous < 0) {
      if (code > 255) throw new Error(`LZW code ${code} follows a table reset`);
      emit = code;
    } else if (code < next) {
      emit = code;
      add(previous, firstByte[code]!);
    } else if (code === next) {
      // the KwKwK case: the previous string plus its own first byte
      emit = previous;
      extra = firstByte[previous]!;
      add(previous, extra);
    } else {
      throw new Error(`LZW code ${code} is not in the table (next free code ${next})`);
    }
    const n = length[emit]!;
    if (written + n + (extra >= 0 ? 1 : 0) > maxBytes) throw new Error(`the LZW data expands past the ${maxBytes} bytes a block holds`);
    for (let k = n - 1, c = emit; k >= 0; k--, c = prefix[c]!) out[written + k] = lastByte[c]!;
    written += n;
    if (extra >= 0) out[written++] = extra;
    previous = code;
    // early change: the width grows when the next free code would no longer fit
    if (next + 1 >= 1 << width && width < 12) width++;
  }
  return out.subarray(0, written);

  function add(before: number, byte: number): void {
    if (next >= TABLE_SIZE) return;
    prefix[next] = before;
    lastByte[next] = byte;
    firstByte[next] = firstByte[before]!;
    length[next] = length[before]! + 1;
    next++;
  }
}
