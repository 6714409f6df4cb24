/**
 * Circulant-embedding fields against the covariance model they are asked for. The bounds are sampling errors of
 * independent normal samples (R realisations, each cell's value N(0, sd²)):
 * - sample mean: standard error sd/√R;
 * - sample variance: (R−1)s²/σ² is χ² with R−1 degrees of freedom, so var(s²) = 2σ⁴/(R−1) (standard result for
 *   normal samples, e.g. Mood, Graybill & Boes 1974, Introduction to the Theory of Statistics, VI.4);
 * - semivariogram at a fixed pair of cells a lag h apart: D = Y(x+h) − Y(x) is N(0, 2γ(h)), so ½D² has mean γ(h)
 *   and variance 2γ(h)² (the χ²₁ moments), standard error γ·√(2/R) for the mean over R realisations
 *   (the classical Matheron estimator, Cressie 1993, Statistics for Spatial Data, 2.4).
 * Each check allows 4 standard errors (two-sided probability of a false failure about 6e-5 per check).
 */
import { describe, expect, it } from 'vitest';
import { covariance, GaussianFieldGenerator, type FieldSpec } from '../../src/ensemble/field.js';

const R = 400;

function realisations(spec: FieldSpec, seed: number): Float64Array[] {
  const gen = new GaussianFieldGenerator(spec);
  return Array.from({ length: R }, (_, i) => gen.generate(seed, i));
}

function checkModel(spec: FieldSpec, seed: number) {
  const fields = realisations(spec, seed);
  const { nx, sd } = spec;
  const cells = [
    [2, 3],
    [10, 12],
    [spec.ny - 3, spec.nx - 4],
  ];
  for (const [row, col] of cells) {
    const p = row! * nx + col!;
    let sum = 0;
    let sum2 = 0;
    for (const f of fields) sum += f[p]!;
    const mean = sum / R;
    for (const f of fields) sum2 += (f[p]! - mean) ** 2;
    const variance = sum2 / (R - 1);
    // Sample mean: SE = sd/√R.
    expect(Math.abs(mean)).toBeLessThan((4 * sd) / Math.sqrt(R));
    // Sample variance: SE = σ²·√(2/(R−1)).
    expect(Math.abs(variance - sd * sd)).toBeLessThan(4 * sd * sd * Math.sqrt(2 / (R - 1)));
  }
  // Semivariogram γ(h) = sd² − C(h) at lags along x and along y, at one pair of cells each.
  const lags: Array<[number, number]> = [
    [1, 0],
    [3, 0],
    [8, 0],
    [0, 1],
    [0, 4],
    [2, 2],
  ];
  for (const [dc, dr] of lags) {
    const p = 5 * nx + 5;
    const q = (5 + dr) * nx + 5 + dc;
    let s = 0;
    for (const f of fields) s += 0.5 * (f[q]! - f[p]!) ** 2;
    const empirical = s / R;
    const model = sd * sd - covariance(spec, dc * spec.dx, dr * spec.dy);
    expect(Math.abs(empirical - model), `lag (${dc}, ${dr}) cells: ${empirical} vs ${model}`).toBeLessThan(4 * model * Math.sqrt(2 / R));
  }
}

describe('circulant embedding fields (Dietrich & Newsam 1997)', () => {
  it('exponential covariance, anisotropic: mean, variance and semivariogram within sampling error', () => {
    checkModel({ nx: 30, ny: 20, dx: 10, dy: 10, sd: 0.8, lx: 60, ly: 25, model: 'exponential' }, 11);
  });

  it('gaussian covariance: mean, variance and semivariogram within sampling error; embedding non-negative', () => {
    const spec: FieldSpec = { nx: 30, ny: 20, dx: 10, dy: 20, sd: 1.2, lx: 40, ly: 60, model: 'gaussian' };
    const gen = new GaussianFieldGenerator(spec);
    expect(gen.report.minEigenvalue).toBeGreaterThanOrEqual(-1e-10 * gen.report.maxEigenvalue);
    checkModel(spec, 5);
  });

  it('realisation i depends only on (seed, i): same seed identical, other seeds and indices differ', () => {
    const spec: FieldSpec = { nx: 12, ny: 9, dx: 1, dy: 1, sd: 1, lx: 3, ly: 3, model: 'exponential' };
    const a = new GaussianFieldGenerator(spec);
    const b = new GaussianFieldGenerator(spec);
    b.generate(7, 99); // a different history must not matter
    expect(Array.from(b.generate(7, 3))).toEqual(Array.from(a.generate(7, 3)));
    expect(Array.from(a.generate(8, 3))).not.toEqual(Array.from(a.generate(7, 3)));
    expect(Array.from(a.generate(7, 4))).not.toEqual(Array.from(a.generate(7, 3)));
  });

  it('sd = 0 gives a zero field', () => {
    const gen = new GaussianFieldGenerator({ nx: 5, ny: 4, dx: 1, dy: 1, sd: 0, lx: 3, ly: 3, model: 'gaussian' });
    expect(Array.from(gen.generate(1, 0)).every((v) => v === 0)).toBe(true);
  });
});
