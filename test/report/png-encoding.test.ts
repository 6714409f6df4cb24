/**
 * The PNG encodings used to save time (issue 15) keep every pixel: PNG is lossless whatever the filter and the
 * DEFLATE settings (PNG specification, ISO/IEC 15948:2004, sections 9 and 10), so a faster encoding may change the
 * bytes but never the image. Checked here with an outside decoder (pngjs's reader, a general-purpose registry
 * library) and, for the map, with the rasteriser itself (resvg): the map drawn with the quickly encoded cell image
 * rasterises to the same PNG, byte for byte, as with the smallest encoding.
 */
import { PNG } from 'pngjs';
import { describe, expect, it } from 'vitest';
import type { Grid } from '../../src/grid.js';
import { renderMapSvg, type MapInput } from '../../src/report/map.js';
import { encodePng, svgToPng } from '../../src/report/png.js';

const CAUTION =
  'Screening-level result. Outputs need review by a qualified hydrogeologist before any decision; local regulations and licensed practice govern.';

function decode(bytes: Uint8Array): { width: number; height: number; data: Buffer } {
  const png = PNG.sync.read(Buffer.from(bytes));
  return { width: png.width, height: png.height, data: png.data };
}

describe('PNG encodings', () => {
  // an invented image with smooth areas, sharp edges, transparency and noise, so that every filter is exercised
  const width = 211;
  const height = 97;
  const rgba = new Uint8Array(width * height * 4);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const o = 4 * (y * width + x);
      rgba[o] = (x * 3 + y) & 255;
      rgba[o + 1] = x > 100 ? 250 : (y * 7) & 255;
      rgba[o + 2] = (x * y * 2654435761) >>> 24;
      rgba[o + 3] = (x + y) % 17 === 0 ? 0 : 255;
    }
  }

  for (const options of [{}, { fast: true }, { filter: 0 as const }, { filter: 1 as const }, { filter: 4 as const }]) {
    it(`decodes to the same pixels with ${JSON.stringify(options)}`, () => {
      const image = decode(encodePng(rgba, width, height, options));
      expect([image.width, image.height]).toEqual([width, height]);
      expect(Buffer.from(rgba).equals(image.data)).toBe(true);
    });
  }

  it('gives the same map PNG whether the cell image inside the SVG is encoded quickly or as small as possible', () => {
    const nx = 300;
    const ny = 200;
    const grid: Grid = { nx, ny, transform: [600000, 25, 0, 5000000, 0, -25], crs: { epsg: 32633, geographic: false, geoKeys: {} } };
    const values = new Float64Array(nx * ny);
    for (let p = 0; p < values.length; p++) values[p] = 100 - 0.03 * (p % nx) + Math.sin(Math.floor(p / nx) / 9);
    for (let p = 0; p < 900; p++) values[p * 7] = Number.NaN;
    const input: MapInput = {
      grid,
      values,
      quantity: 'head',
      units: { length: 'm', time: 'd' },
      title: 'Encodings (invented)',
      caution: CAUTION,
    };
    const small = renderMapSvg(input, { quickCellImage: false });
    const quick = renderMapSvg(input, { quickCellImage: true });
    expect(quick.svg).not.toEqual(small.svg);
    expect(Buffer.from(svgToPng(quick.svg).png).equals(Buffer.from(svgToPng(small.svg).png))).toBe(true);
  });
});
