import { describe, expect, it } from 'vitest';
import { abBins, binHistogram, rebalanceWeights } from '../src/model/index.js';
import { labStatistics } from '../src/report/reinhard.js';
import { abStatisticsFromClassWeights, distributionFromClassWeights, trainingColourFor } from '../src/report/training-colour.js';

// The Reinhard baseline's target comes from the class-rebalancing weights a model stores
// (Zhang et al. 2016, eq. 4). These checks make weights from known a*b* samples with the model
// module's own functions and recover the samples' statistics from them.

function samples(n: number): { a: Float32Array; b: Float32Array } {
  // A deterministic lattice: a* uniform on [0, 20), b* uniform on [10, 40), independent.
  const a = new Float32Array(n * n), b = new Float32Array(n * n);
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
    a[i * n + j] = (20 * (i + 0.5)) / n;
    b[i * n + j] = 10 + (30 * (j + 0.5)) / n;
  }
  return { a, b };
}

describe('training colour from class weights', () => {
  it('inverts w = c / ((1 - λ) p + λ / Q) exactly, worked by hand for Q = 2', () => {
    // λ = 0.5, p = (0.8, 0.2): w ∝ 1 / (0.4 + 0.25), 1 / (0.1 + 0.25) = 1.538.., 2.857..; any common scale.
    const w = [3 / 0.65, 3 / 0.35];
    const p = distributionFromClassWeights(w, 0.5);
    expect(p[0]).toBeCloseTo(0.8, 12);
    expect(p[1]).toBeCloseTo(0.2, 12);
  });

  it("recovers the training samples' a*b* means within 0.3 and sds within 1", () => {
    const bins = abBins();
    const { a, b } = samples(200);
    const truth = labStatistics({ L: new Float32Array(a.length), a, b }); // a* mean 10, sd 5.77; b* mean 25, sd 8.66
    const weights = rebalanceWeights(binHistogram(a, b, bins), undefined, undefined, bins);
    const got = abStatisticsFromClassWeights(weights, bins);
    // Tolerances: common practice for a histogram on 10-unit cells smoothed with sigma 5 (the
    // correction for the added variance is exact only far from the gamut edge).
    expect(Math.abs(got.mean[1] - truth.mean[1])).toBeLessThan(0.3);
    expect(Math.abs(got.mean[2] - truth.mean[2])).toBeLessThan(0.3);
    expect(Math.abs(got.sd[1] - truth.sd[1])).toBeLessThan(1);
    expect(Math.abs(got.sd[2] - truth.sd[2])).toBeLessThan(1);
  });

  it('falls back to the given statistics, and says so, when a model has no weights', () => {
    const bins = abBins();
    const fallback = { mean: [NaN, 1, 2] as [number, number, number], sd: [NaN, 3, 4] as [number, number, number] };
    const t = trainingColourFor([], bins, () => fallback);
    expect(t.source).toBe('scored-photos');
    expect(t.statistics).toBe(fallback);
    expect(t.description).toMatch(/scored photos/);
    const { a, b } = samples(20);
    expect(trainingColourFor(rebalanceWeights(binHistogram(a, b, bins)), bins, () => fallback).source).toBe('class-weights');
  });
});
