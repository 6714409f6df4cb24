/**
 * Conditional simulation by kriging the residuals (Journel & Huijbregts 1978; Deutsch & Journel 1998, GSLIB V.2.4):
 * realisations take the measured value at the data cells, and the ensemble variance next to a datum is the simple
 * kriging variance, below the unconditioned sd² there. For one datum at distance h the simple kriging variance is
 * sd²·(1 − ρ(h)²) (the one-point simple kriging system, e.g. Isaaks & Srivastava 1989, ch. 12); the sample variance
 * is checked against it within 4 standard errors σ²·√(2/(R−1)) (χ² moments of a normal sample variance).
 */
import { describe, expect, it } from 'vitest';
import { covariance, GaussianFieldGenerator, type FieldSpec } from '../../src/ensemble/field.js';
import { Conditioner } from '../../src/ensemble/conditioning.js';

const spec: FieldSpec = { nx: 24, ny: 18, dx: 10, dy: 10, sd: 1, lx: 50, ly: 50, model: 'exponential' };

describe('conditioning on measured ln K', () => {
  it('honours the data exactly; variance near a datum is the simple kriging variance, below sd²', () => {
    const gen = new GaussianFieldGenerator(spec);
    const data = [
      { id: 'A', row: 9, col: 12, y: 0.7 },
      { id: 'B', row: 2, col: 20, y: -1.1 },
    ];
    const cond = new Conditioner(spec, data);
    const R = 400;
    const near = 9 * spec.nx + 13; // one cell east of A
    const values: number[] = [];
    for (let i = 0; i < R; i++) {
      const f = gen.generate(3, i);
      cond.apply(f);
      for (const d of data) expect(f[d.row * spec.nx + d.col]).toBe(d.y);
      values.push(f[near]!);
    }
    const mean = values.reduce((a, b) => a + b, 0) / R;
    const variance = values.reduce((a, b) => a + (b - mean) ** 2, 0) / (R - 1);
    expect(variance).toBeLessThan(spec.sd ** 2);
    // B is far (> 3 correlation lengths) from the checked cell, so the one-datum formula holds closely
    // (its own effect on the kriging variance there is below 1e-3).
    const rho = covariance(spec, spec.dx, 0) / spec.sd ** 2;
    const expected = spec.sd ** 2 * (1 - rho * rho);
    expect(Math.abs(variance - expected)).toBeLessThan(4 * expected * Math.sqrt(2 / (R - 1)) + 1e-3);
  });

  it('refuses two measurements in one cell', () => {
    expect(
      () =>
        new Conditioner(spec, [
          { id: 'A', row: 1, col: 1, y: 0 },
          { id: 'B', row: 1, col: 1, y: 1 },
        ]),
    ).toThrow(/"A" and "B" fall in the same cell/);
  });
});
