/**
 * The colour statistics of a model's training set, the target of the Reinhard et al. 2001 baseline.
 *
 * kinhue's model metadata does not store a*b* means and deviations directly; it does store the
 * class-rebalancing weights of Zhang et al. 2016 (eq. 4), which are a one-to-one function of the
 * training set's Gaussian-smoothed a*b* bin distribution p~: w_q = c / ((1 - λ) p~_q + λ / Q).
 * Inverting that gives p~ and from it the means (smoothing with a symmetric kernel keeps them) and,
 * after taking off the variance the smoothing (σ²) and the binning (grid² / 12, Sheppard's
 * correction) add, the standard deviations. The inversion needs the λ the weights were made with: each
 * model records its own (`training.rebalance` in kinhue-model.json). Only when a model carries no weights,
 * or weights made with λ = 1 (all equal, so they hold no colour), does the baseline fall back to the
 * pooled statistics of the photos being scored, and says so.
 */
import { abBins, REBALANCE_LAMBDA, SOFT_SIGMA, type AbBins, type TrainingRecord } from '../model/index.js';
import type { LabStatistics } from './reinhard.js';

/** Where the baseline's target statistics came from. */
export type TrainingColourSource = 'class-weights' | 'scored-photos';

/** The target of the Reinhard baseline, with its provenance in words. */
export interface TrainingColour {
  /** a* and b* mean/sd (L* is never transferred: NaN). */
  statistics: LabStatistics;
  source: TrainingColourSource;
  /** One sentence for reports. */
  description: string;
}

/**
 * The training set's smoothed a*b* bin distribution recovered from class-rebalancing weights:
 * p~_q = ((1 / w_q) / sum(1 / w) - λ / Q) / (1 - λ), clipped at 0 against float rounding.
 * @example
 * const p = distributionFromClassWeights(model.meta.classWeights); // sums to 1
 */
export function distributionFromClassWeights(weights: ArrayLike<number>, lambda = REBALANCE_LAMBDA): Float64Array {
  const q = weights.length;
  if (q === 0 || !(lambda < 1)) throw new RangeError('distributionFromClassWeights: need weights and λ < 1');
  let inverseSum = 0;
  for (let i = 0; i < q; i++) {
    if (!(weights[i] > 0)) throw new RangeError(`distributionFromClassWeights: weight ${i} is not positive`);
    inverseSum += 1 / weights[i];
  }
  const p = new Float64Array(q);
  let total = 0;
  for (let i = 0; i < q; i++) {
    p[i] = Math.max(0, (1 / weights[i] / inverseSum - lambda / q) / (1 - lambda));
    total += p[i];
  }
  for (let i = 0; i < q; i++) p[i] /= total;
  return p;
}

/**
 * a*b* means and standard deviations of a training set from its model's class-rebalancing weights.
 * @example
 * const stats = abStatisticsFromClassWeights(meta.classWeights); // stats.mean[1], stats.mean[2]: a*, b*
 */
export function abStatisticsFromClassWeights(
  weights: ArrayLike<number>,
  bins: AbBins = abBins(),
  sigma = SOFT_SIGMA,
  lambda = REBALANCE_LAMBDA,
): LabStatistics {
  if (weights.length !== bins.count) {
    throw new RangeError(`abStatisticsFromClassWeights: ${weights.length} weights for ${bins.count} bins`);
  }
  const p = distributionFromClassWeights(weights, lambda);
  let ma = 0,
    mb = 0;
  for (let i = 0; i < p.length; i++) {
    ma += p[i] * bins.a[i];
    mb += p[i] * bins.b[i];
  }
  let va = 0,
    vb = 0;
  for (let i = 0; i < p.length; i++) {
    va += p[i] * (bins.a[i] - ma) ** 2;
    vb += p[i] * (bins.b[i] - mb) ** 2;
  }
  const added = sigma * sigma + (bins.grid * bins.grid) / 12;
  return { mean: [NaN, ma, mb], sd: [NaN, Math.sqrt(Math.max(0, va - added)), Math.sqrt(Math.max(0, vb - added))] };
}

/**
 * The rebalancing λ a model's weights were made with, from its training record; models that record
 * none were trained before the option existed, at the paper's 0.5 (REBALANCE_LAMBDA).
 * @example
 * recordedRebalance(model.meta.training); // 0.95 for the shipped model
 */
export function recordedRebalance(training: TrainingRecord | null | undefined): number {
  const lambda = training?.rebalance;
  return typeof lambda === 'number' && lambda > 0 && lambda <= 1 ? lambda : REBALANCE_LAMBDA;
}

/**
 * The baseline target for one model: from its class weights when it has them (one per bin, made with
 * rebalancing `lambda` below 1), else the pooled statistics of the scored photos (`fallback`), labelled as such.
 * @example
 * const target = trainingColourFor(model.meta.classWeights, model.bins, () => pooledStatistics, recordedRebalance(model.meta.training));
 */
export function trainingColourFor(
  classWeights: ArrayLike<number> | undefined,
  bins: AbBins,
  fallback: () => LabStatistics,
  lambda = REBALANCE_LAMBDA,
): TrainingColour {
  const weighted = !!classWeights && classWeights.length > 0 && classWeights.length === bins.count;
  if (weighted && lambda < 1) {
    return {
      statistics: abStatisticsFromClassWeights(classWeights, bins, SOFT_SIGMA, lambda),
      source: 'class-weights',
      description: `a*b* mean and sd of the model's training set, recovered from the class-rebalancing weights in its metadata (rebalancing λ ${lambda})`,
    };
  }
  const why = weighted
    ? 'its class weights were made with rebalancing λ 1, so they are all equal and hold no colour'
    : 'no class-rebalancing weights';
  return {
    statistics: fallback(),
    source: 'scored-photos',
    description: `the model records no training colour (${why}); the pooled a*b* mean and sd of the scored photos stand in, which favours the baseline`,
  };
}
