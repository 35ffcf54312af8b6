/**
 * Training targets and the loss of Zhang et al. (2016, eq. 2): a*b* planes are reduced to the
 * network's output resolution, soft-encoded onto the bins, and each pixel's cross-entropy is
 * weighted by the rebalancing weight of its target's nearest bin.
 */
import * as tf from '@tensorflow/tfjs';
import type { AbBins } from './bins.js';
import { softEncode, type SoftEncodeOptions } from './encoding.js';

/** Dense training targets for one batch at output resolution. */
export interface BatchTargets {
  /** Soft-encoded distribution, [pixels x Q], pixel-major (n, y, x). */
  target: Float32Array;
  /** Rebalancing weight of each pixel. */
  weight: Float32Array;
  /** Output height and width. */
  height: number;
  width: number;
}

/**
 * Averages each factor x factor block of a plane (the area average; output sizes round down).
 * @example
 * downsamplePlane(a, 128, 128, 4); // 32 x 32
 */
export function downsamplePlane(plane: Float32Array, width: number, height: number, factor: number, out?: Float32Array): Float32Array {
  const ow = Math.floor(width / factor);
  const oh = Math.floor(height / factor);
  const res = out ?? new Float32Array(ow * oh);
  const norm = 1 / (factor * factor);
  for (let y = 0; y < oh; y++) {
    for (let x = 0; x < ow; x++) {
      let s = 0;
      for (let dy = 0; dy < factor; dy++) {
        const row = (y * factor + dy) * width + x * factor;
        for (let dx = 0; dx < factor; dx++) s += plane[row + dx];
      }
      res[y * ow + x] = s * norm;
    }
  }
  return res;
}

/**
 * Builds the dense targets of a batch. `ab` holds, per image, its full-resolution a* plane then
 * its b* plane (each h*w values, row-major).
 */
export function batchTargets(
  ab: Float32Array,
  n: number,
  h: number,
  w: number,
  factor: number,
  bins: AbBins,
  classWeights: Float32Array,
  options: SoftEncodeOptions = {},
): BatchTargets {
  if (ab.length !== n * 2 * h * w) {
    throw new RangeError(`a*b* batch has ${ab.length} values, expected ${n} x 2 x ${h} x ${w} = ${n * 2 * h * w}`);
  }
  const oh = Math.floor(h / factor);
  const ow = Math.floor(w / factor);
  const per = oh * ow;
  const a = new Float32Array(n * per);
  const b = new Float32Array(n * per);
  for (let i = 0; i < n; i++) {
    const base = i * 2 * h * w;
    downsamplePlane(ab.subarray(base, base + h * w), w, h, factor, a.subarray(i * per, (i + 1) * per));
    downsamplePlane(ab.subarray(base + h * w, base + 2 * h * w), w, h, factor, b.subarray(i * per, (i + 1) * per));
  }
  const soft = softEncode(a, b, bins, options);
  const q = bins.count;
  const k = soft.neighbours;
  const target = new Float32Array(n * per * q);
  const weight = new Float32Array(n * per);
  for (let p = 0; p < n * per; p++) {
    for (let j = 0; j < k; j++) target[p * q + soft.index[p * k + j]] += soft.weight[p * k + j];
    // The soft encoding lists the nearest bin first.
    weight[p] = classWeights[soft.index[p * k]];
  }
  return { target, weight, height: oh, width: ow };
}

/**
 * Rebalanced cross-entropy: mean over pixels of -w_p * sum_q Z_pq log softmax(logits)_pq.
 * `logits` [n, h, w, Q], `target` same shape, `weight` [n, h, w].
 */
export function weightedCrossEntropy(logits: tf.Tensor4D, target: tf.Tensor4D, weight: tf.Tensor3D): tf.Scalar {
  return tf.tidy(() => {
    const logp = tf.logSoftmax(logits, -1);
    const perPixel = tf.neg(tf.sum(tf.mul(target, logp), -1));
    return tf.mean(tf.mul(perPixel, weight)) as tf.Scalar;
  });
}
