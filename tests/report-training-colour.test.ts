import { describe, expect, it } from 'vitest';
import { abBins, binHistogram, rebalanceWeights } from '../src/model/index.js';
import { labStatistics } from '../src/report/reinhard.js';
import {
  abStatisticsFromClassWeights,
  distributionFromClassWeights,
  recordedRebalance,
  trainingColourFor,
} from '../src/report/training-colour.js';

// The Reinhard baseline's target comes from the class-rebalancing weights a model stores
// (Zhang et al. 2016, eq. 4). These checks make weights from known a*b* samples with the model
// module's own functions and recover the samples' statistics from them.

function samples(n: number): { a: Float32Array; b: Float32Array } {
  // A deterministic lattice: a* uniform on [0, 20), b* uniform on [10, 40), independent.
  const a = new Float32Array(n * n),
    b = new Float32Array(n * n);
  for (let i = 0; i < n; i++)
    for (let j = 0; j < n; j++) {
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

  it("recovers the statistics of weights made with the model's own λ (0.95, as the shipped model records), not 0.5", () => {
    const bins = abBins();
    const { a, b } = samples(200);
    const truth = labStatistics({ L: new Float32Array(a.length), a, b });
    const weights = rebalanceWeights(binHistogram(a, b, bins), 0.95, undefined, bins);
    const lambda = recordedRebalance({ rebalance: 0.95 });
    expect(lambda).toBe(0.95);
    const got = trainingColourFor(
      weights,
      bins,
      () => {
        throw new Error('no fallback expected');
      },
      lambda,
    );
    expect(got.source).toBe('class-weights');
    expect(got.description).toContain('λ 0.95');
    // Tolerances as above (common practice for this histogram).
    expect(Math.abs(got.statistics.mean[1] - truth.mean[1])).toBeLessThan(0.3);
    expect(Math.abs(got.statistics.mean[2] - truth.mean[2])).toBeLessThan(0.3);
    expect(Math.abs(got.statistics.sd[1] - truth.sd[1])).toBeLessThan(1);
    expect(Math.abs(got.statistics.sd[2] - truth.sd[2])).toBeLessThan(1);
    // Inverting the same weights as if made with 0.5 misses the mean by far more (the fault this guards against).
    const wrong = abStatisticsFromClassWeights(weights, bins, undefined, 0.5);
    expect(Math.abs(wrong.mean[1] - truth.mean[1])).toBeGreaterThan(2);
  });

  it('reads λ from the training record, 0.5 where none is recorded, and gives up on λ = 1', () => {
    // 0.5: the paper's λ (Zhang et al. 2016), which models trained before the option existed used.
    expect(recordedRebalance(null)).toBe(0.5);
    expect(recordedRebalance({})).toBe(0.5);
    expect(recordedRebalance({ rebalance: 'high' })).toBe(0.5);
    expect(recordedRebalance({ rebalance: 0.8 })).toBe(0.8);
    // λ = 1 makes every weight equal: no colour to recover, so the scored photos stand in, and the report says why.
    const bins = abBins();
    const fallback = { mean: [NaN, 1, 2] as [number, number, number], sd: [NaN, 3, 4] as [number, number, number] };
    const flat = trainingColourFor(new Float32Array(bins.count).fill(1), bins, () => fallback, recordedRebalance({ rebalance: 1 }));
    expect(flat.source).toBe('scored-photos');
    expect(flat.description).toMatch(/λ 1/);
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
