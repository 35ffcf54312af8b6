/**
 * From a*b* values to distributions over the bins and back (Zhang, Isola & Efros 2016, sections
 * 2.1-2.3): soft encoding of targets, class rebalancing weights, annealed-mean decoding, and a
 * per-pixel confidence from the predicted distribution.
 */
import { type AbBins, abBins, binLookup, nearestBin } from './bins.js';

/** Defaults from the paper: 5 nearest bins, sigma 5, lambda 0.5, temperature 0.38. */
export const SOFT_NEIGHBOURS = 5;
export const SOFT_SIGMA = 5;
export const REBALANCE_LAMBDA = 0.5;
export const DEFAULT_TEMPERATURE = 0.38;

/** A sparse soft encoding: for pixel p, bins index[p*k + j] with weights weight[p*k + j] (sum 1). */
export interface SoftTargets {
  index: Int32Array;
  weight: Float32Array;
  neighbours: number;
}

export interface SoftEncodeOptions {
  neighbours?: number;
  sigma?: number;
}

/**
 * Soft-encodes a*b* values onto their `neighbours` nearest bins with Gaussian weights
 * exp(-d^2 / 2 sigma^2), normalised to sum 1.
 * @example
 * const t = softEncode(Float32Array.of(12), Float32Array.of(-3), abBins());
 * // t.index.slice(0, 5): the 5 nearest bins, t.weight: their weights, largest first
 */
export function softEncode(a: Float32Array, b: Float32Array, bins: AbBins, options: SoftEncodeOptions = {}): SoftTargets {
  const k = Math.min(options.neighbours ?? SOFT_NEIGHBOURS, bins.count);
  const sigma = options.sigma ?? SOFT_SIGMA;
  const n = a.length;
  if (b.length !== n) throw new RangeError(`softEncode: a has ${n} values, b has ${b.length}`);
  const index = new Int32Array(n * k);
  const weight = new Float32Array(n * k);
  const lookup = binLookup(bins);
  const g = bins.grid;
  // Candidates: bins within +-span cells of the value's own cell; any bin outside is at least
  // (span - 0.5) cells away, so a k-th distance within that radius is exact.
  const span = Math.ceil(Math.sqrt(k));
  const safe = ((span - 0.5) * g) ** 2;
  const candD = new Float64Array((2 * span + 1) ** 2);
  const candQ = new Int32Array((2 * span + 1) ** 2);
  const bestD = new Float64Array(k);
  const bestQ = new Int32Array(k);
  const inv2s2 = 1 / (2 * sigma * sigma);
  for (let p = 0; p < n; p++) {
    const av = a[p];
    const bv = b[p];
    let found = 0;
    for (let i = -span; i <= span; i++) {
      for (let j = -span; j <= span; j++) {
        const q = lookup.cellIndex(av + i * g, bv + j * g);
        if (q < 0) continue;
        const da = bins.a[q] - av;
        const db = bins.b[q] - bv;
        candD[found] = da * da + db * db;
        candQ[found++] = q;
      }
    }
    if (found >= k) selectSmallest(candD, candQ, found, k, bestD, bestQ);
    if (found < k || bestD[k - 1] > safe) {
      found = allBins(bins, av, bv, candD, candQ);
      selectSmallest(candD, candQ, found, k, bestD, bestQ);
    }
    let sum = 0;
    for (let j = 0; j < k; j++) sum += Math.exp(-(bestD[j] - bestD[0]) * inv2s2);
    for (let j = 0; j < k; j++) {
      index[p * k + j] = bestQ[j];
      weight[p * k + j] = Math.exp(-(bestD[j] - bestD[0]) * inv2s2) / sum;
    }
  }
  return { index, weight, neighbours: k };
}

let wideD = new Float64Array(0);
let wideQ = new Int32Array(0);

/** Fallback for values far outside the bins: every bin is a candidate. */
function allBins(bins: AbBins, av: number, bv: number, candD: Float64Array, candQ: Int32Array): number {
  // Keep the k smallest in the caller's arrays by first sorting all bins by distance.
  if (wideD.length < bins.count) {
    wideD = new Float64Array(bins.count);
    wideQ = new Int32Array(bins.count);
  }
  for (let q = 0; q < bins.count; q++) {
    const da = bins.a[q] - av;
    const db = bins.b[q] - bv;
    wideD[q] = da * da + db * db;
    wideQ[q] = q;
  }
  const m = Math.min(candD.length, bins.count);
  selectSmallest(wideD, wideQ, bins.count, m, candD, candQ);
  return m;
}

/** The k smallest of d[0..n) in ascending order (ties by lower bin index), by insertion. */
function selectSmallest(d: Float64Array, q: Int32Array, n: number, k: number, outD: Float64Array, outQ: Int32Array): void {
  let filled = 0;
  for (let i = 0; i < n; i++) {
    const di = d[i];
    const qi = q[i];
    if (filled === k && (di > outD[k - 1] || (di === outD[k - 1] && qi > outQ[k - 1]))) continue;
    let j = filled < k ? filled++ : k - 1;
    while (j > 0 && (outD[j - 1] > di || (outD[j - 1] === di && outQ[j - 1] > qi))) {
      outD[j] = outD[j - 1];
      outQ[j] = outQ[j - 1];
      j--;
    }
    outD[j] = di;
    outQ[j] = qi;
  }
}

/**
 * Adds to `counts` how many of the pixels have each bin as their nearest (the empirical
 * distribution of the training data). Pass the same `counts` for every image.
 * @example
 * const counts = new Float64Array(bins.count);
 * for (const lab of images) binHistogram(lab.a, lab.b, bins, counts);
 */
export function binHistogram(a: Float32Array, b: Float32Array, bins: AbBins, counts = new Float64Array(bins.count)): Float64Array {
  if (counts.length !== bins.count) throw new RangeError(`binHistogram: counts has ${counts.length} entries for ${bins.count} bins`);
  for (let p = 0; p < a.length; p++) counts[nearestBin(bins, a[p], b[p])] += 1;
  return counts;
}

/**
 * Class rebalancing weights (Zhang et al. 2016, eq. 3-4): the empirical bin distribution p is
 * smoothed with a Gaussian of `sigma` over a*b*, mixed with the uniform one, w ∝ ((1 - λ) p~ +
 * λ / Q)^-1, and scaled so that the expected weight under p~ is 1.
 * @example
 * const w = rebalanceWeights(counts); // rare (saturated) bins get weights above 1
 */
export function rebalanceWeights(
  freq: ArrayLike<number>,
  lambda = REBALANCE_LAMBDA,
  sigma = SOFT_SIGMA,
  bins: AbBins = abBins(),
): Float32Array {
  const q = bins.count;
  if (freq.length !== q) throw new RangeError(`rebalanceWeights: ${freq.length} frequencies for ${q} bins`);
  let total = 0;
  for (let i = 0; i < q; i++) total += freq[i];
  if (!(total > 0)) throw new RangeError('rebalanceWeights: the frequencies sum to zero; count some training pixels first');
  const smooth = new Float64Array(q);
  const inv2s2 = 1 / (2 * sigma * sigma);
  let smoothTotal = 0;
  for (let i = 0; i < q; i++) {
    let s = 0;
    for (let j = 0; j < q; j++) {
      const da = bins.a[i] - bins.a[j];
      const db = bins.b[i] - bins.b[j];
      s += (freq[j] / total) * Math.exp(-(da * da + db * db) * inv2s2);
    }
    smooth[i] = s;
    smoothTotal += s;
  }
  const w = new Float64Array(q);
  let expected = 0;
  for (let i = 0; i < q; i++) {
    smooth[i] /= smoothTotal;
    w[i] = 1 / ((1 - lambda) * smooth[i] + lambda / q);
    expected += smooth[i] * w[i];
  }
  return Float32Array.from(w, (x) => x / expected);
}

/** Numerically stable softmax of logits / temperature for pixel p into `out`. */
function annealed(logits: Float32Array, p: number, q: number, temperature: number, out: Float64Array): void {
  const base = p * q;
  let max = -Infinity;
  for (let j = 0; j < q; j++) max = Math.max(max, logits[base + j]);
  let sum = 0;
  for (let j = 0; j < q; j++) {
    const e = Math.exp((logits[base + j] - max) / temperature);
    out[j] = e;
    sum += e;
  }
  for (let j = 0; j < q; j++) out[j] /= sum;
}

/**
 * Annealed-mean decoding: the mean bin centre under softmax(logits / T), which is the paper's
 * f_T(z) = exp(log z / T) / sum exp(log z / T) of z = softmax(logits). T = 1 is the mean,
 * T -> 0 the mode. `logits` holds Q values per pixel, pixel-major.
 * @example
 * const { a, b } = annealedMean(logits, abBins(), 0.38);
 */
export function annealedMean(logits: Float32Array, bins: AbBins, temperature = DEFAULT_TEMPERATURE): { a: Float32Array; b: Float32Array } {
  const q = bins.count;
  const n = logits.length / q;
  if (!Number.isInteger(n)) throw new RangeError(`annealedMean: ${logits.length} logits is not a multiple of ${q} bins`);
  if (!(temperature > 0)) throw new RangeError(`annealedMean: temperature must be above 0, got ${temperature}`);
  const a = new Float32Array(n);
  const b = new Float32Array(n);
  const prob = new Float64Array(q);
  for (let p = 0; p < n; p++) {
    annealed(logits, p, q, temperature, prob);
    let sa = 0;
    let sb = 0;
    for (let j = 0; j < q; j++) {
      sa += prob[j] * bins.a[j];
      sb += prob[j] * bins.b[j];
    }
    a[p] = sa;
    b[p] = sb;
  }
  return { a, b };
}

/**
 * Per-pixel confidence in [0, 1]: one minus the entropy of the predicted distribution
 * softmax(logits / T) divided by log Q (1: all mass on one bin, 0: uniform).
 * Pass temperature 1 for the raw distribution.
 * @example
 * const c = confidence(logits, abBins().count, 1);
 */
export function confidence(logits: Float32Array, binCount: number, temperature = 1): Float32Array {
  const q = binCount;
  const n = logits.length / q;
  if (!Number.isInteger(n)) throw new RangeError(`confidence: ${logits.length} logits is not a multiple of ${q} bins`);
  const out = new Float32Array(n);
  const prob = new Float64Array(q);
  const logQ = Math.log(q);
  for (let p = 0; p < n; p++) {
    annealed(logits, p, q, temperature, prob);
    let h = 0;
    for (let j = 0; j < q; j++) if (prob[j] > 0) h -= prob[j] * Math.log(prob[j]);
    out[p] = Math.min(1, Math.max(0, 1 - h / logQ));
  }
  return out;
}
