/**
 * Colour ramps for the quick-look maps, as 256-entry RGB lookup tables built once from published open colour maps
 * (d3-scale-chromatic), so that colouring a grid is a typed-array lookup per cell.
 *  - head: cividis, a perceptually uniform ramp optimised for colour-vision deficiency
 *    (Nunez, Anderton & Renslow 2018, PLOS ONE 13(7) e0199239; citation from memory).
 *  - drawdown: brown-to-blue-green diverging scheme BrBG (Brewer, ColorBrewer 2.0; listed there as colour-blind safe),
 *    centred on zero so that zero is the lightest colour: brown = lowered, blue-green = raised.
 */
import { interpolateBrBG, interpolateCividis } from 'd3-scale-chromatic';

export interface ColourRamp {
  /** 256 RGB triplets, 0..255. */
  readonly table: Uint8Array;
  /** Value mapped to the first entry and to the last. */
  readonly min: number;
  readonly max: number;
}

const SIZE = 256;

function tableFrom(interpolate: (t: number) => string, reverse = false, from = 0): Uint8Array {
  const table = new Uint8Array(SIZE * 3);
  for (let k = 0; k < SIZE; k++) {
    const t = from + ((1 - from) * k) / (SIZE - 1);
    const rgb = parseColour(interpolate(reverse ? 1 - t : t));
    table[3 * k] = rgb[0];
    table[3 * k + 1] = rgb[1];
    table[3 * k + 2] = rgb[2];
  }
  return table;
}

/** Parse `rgb(r, g, b)` or `#rrggbb` as produced by d3-scale-chromatic. */
export function parseColour(text: string): [number, number, number] {
  const rgb = /^rgb\((\d+),\s*(\d+),\s*(\d+)\)$/.exec(text);
  if (rgb) return [Number(rgb[1]), Number(rgb[2]), Number(rgb[3])];
  const hex = /^#([0-9a-f]{2})([0-9a-f]{2})([0-9a-f]{2})$/i.exec(text);
  if (hex) return [parseInt(hex[1]!, 16), parseInt(hex[2]!, 16), parseInt(hex[3]!, 16)];
  throw new Error(`unexpected colour text ${text}`);
}

let cividis: Uint8Array | null = null;
let brbg: Uint8Array | null = null;

/** Sequential head ramp from min (dark blue) to max (yellow). */
export function headRamp(min: number, max: number): ColourRamp {
  // The darkest tenth of cividis is left out so that dark contour lines stay readable on low heads.
  cividis ??= tableFrom(interpolateCividis, false, 0.1);
  return { table: cividis, min, max: max > min ? max : min + 1 };
}

/** Diverging drawdown ramp symmetric about zero: -limit (raised, blue-green) .. 0 (light) .. +limit (lowered, brown). */
export function drawdownRamp(limit: number): ColourRamp {
  brbg ??= tableFrom(interpolateBrBG, true);
  const l = limit > 0 && Number.isFinite(limit) ? limit : 1;
  return { table: brbg, min: -l, max: l };
}

/** Index into the ramp's table (0..255) for a finite value, clamped at the ends. */
export function rampIndex(ramp: ColourRamp, value: number): number {
  const t = (value - ramp.min) / (ramp.max - ramp.min);
  const k = Math.round(t * (SIZE - 1));
  return k < 0 ? 0 : k > SIZE - 1 ? SIZE - 1 : k;
}

export function rampHex(ramp: ColourRamp, value: number): string {
  const k = rampIndex(ramp, value) * 3;
  const t = ramp.table;
  return `#${hex2(t[k]!)}${hex2(t[k + 1]!)}${hex2(t[k + 2]!)}`;
}

function hex2(v: number): string {
  return v.toString(16).padStart(2, '0');
}

/**
 * RGBA pixels (nx * ny * 4) colouring each cell by the ramp; NaN cells are fully transparent.
 * Row 0 of the image is row 0 of the grid.
 */
export function colourCells(values: Float64Array, ramp: ColourRamp, out = new Uint8Array(values.length * 4)): Uint8Array {
  const table = ramp.table;
  const scale = (SIZE - 1) / (ramp.max - ramp.min);
  const min = ramp.min;
  for (let p = 0; p < values.length; p++) {
    const v = values[p]!;
    const o = 4 * p;
    if (v !== v) {
      out[o] = 0;
      out[o + 1] = 0;
      out[o + 2] = 0;
      out[o + 3] = 0;
      continue;
    }
    let k = Math.round((v - min) * scale);
    k = k < 0 ? 0 : k > SIZE - 1 ? SIZE - 1 : k;
    out[o] = table[3 * k]!;
    out[o + 1] = table[3 * k + 1]!;
    out[o + 2] = table[3 * k + 2]!;
    out[o + 3] = 255;
  }
  return out;
}
