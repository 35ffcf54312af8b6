/**
 * From the network's distribution over a*b* bins to one colour per pixel. Two ways:
 * - 'least-ciede2000' (the default): the Bayes decision for the metric we are scored by. The
 *   distribution is first corrected for class rebalancing (training weighted each pixel by w(q), so the
 *   network learnt p(q) proportional to w(q) P(q); dividing by w gives back P), then the candidate colour
 *   with the least expected CIEDE2000 difference under it is chosen. Candidates are neutral grey and
 *   every bin centre at a third, two thirds and all of its chroma, so an uncertain pixel gets a muted
 *   colour in the likely hue rather than a confident wrong one.
 * - 'annealed-mean' (Zhang et al. 2016): the mean of softmax(logits / T), more vivid and more often wrong.
 */
import * as tf from '@tensorflow/tfjs';
import { ciede2000 } from '../colour/index.js';
import type { AbBins } from './bins.js';

export type Decoding = 'least-ciede2000' | 'annealed-mean';

export const DECODINGS: readonly Decoding[] = ['least-ciede2000', 'annealed-mean'];

export const DEFAULT_DECODING: Decoding = 'least-ciede2000';

/**
 * How much of the class rebalancing least-CIEDE2000 decoding leaves in, from 0 (all undone: the
 * network's estimate of the true distribution, the most cautious colour) to 1 (none undone: rare,
 * saturated colours keep the weight training gave them). Between, the weights are undone to the
 * power 1 - vividness, as Zhang et al. 2016 mix the empirical distribution with a uniform one.
 * Folders that do not say were decoded at 0; new models get DEFAULT_VIVIDNESS (see the model card
 * for how it was chosen).
 */
export const DEFAULT_VIVIDNESS = 0.25;

/**
 * The class weights least-CIEDE2000 decoding divides by at a vividness: w^(1 - vividness).
 * @example
 * decodingWeights([4, 0.25], 0.5); // Float32Array [2, 0.5]
 */
export function decodingWeights(classWeights: ArrayLike<number>, vividness: number): Float32Array {
  const keep = 1 - vividness;
  return Float32Array.from(classWeights, (w) => (keep === 1 ? w : w ** keep));
}

/** Fractions of each bin's chroma offered as candidates (besides grey). */
export const CANDIDATE_CHROMA = [1 / 3, 2 / 3, 1];

/**
 * The decoding a caller asked for: the one named; else annealed mean when only a temperature was given
 * (a temperature has no other use); else the model's own.
 * @example
 * chooseDecoding({ temperature: 0.3 }, 'least-ciede2000'); // 'annealed-mean'
 */
export function chooseDecoding(asked: { decoding?: Decoding; temperature?: number }, own: Decoding): Decoding {
  return asked.decoding ?? (asked.temperature !== undefined ? 'annealed-mean' : own);
}

/** Candidate colours and their CIEDE2000 difference from every bin centre. */
export interface DecodingTable {
  /** Candidate a* and b*; candidate 0 is neutral grey. */
  a: Float32Array;
  b: Float32Array;
  /** difference[q * count + c]: CIEDE2000 between bin q and candidate c at equal L*. */
  difference: Float32Array;
  count: number;
}

const tables = new WeakMap<AbBins, DecodingTable>();

/**
 * The candidates and difference table for a set of bins (computed once per bins object). With equal
 * L* the CIEDE2000 difference does not depend on L* (S_L only scales the lightness term, which is 0),
 * so one table serves every pixel.
 * @example
 * const t = decodingTable(abBins()); // t.count === 1 + 3 * 262
 */
export function decodingTable(bins: AbBins): DecodingTable {
  let table = tables.get(bins);
  if (table) return table;
  const q = bins.count;
  const count = 1 + CANDIDATE_CHROMA.length * q;
  const a = new Float32Array(count);
  const b = new Float32Array(count);
  CANDIDATE_CHROMA.forEach((f, k) => {
    for (let j = 0; j < q; j++) {
      a[1 + k * q + j] = bins.a[j] * f;
      b[1 + k * q + j] = bins.b[j] * f;
    }
  });
  const difference = new Float32Array(q * count);
  for (let j = 0; j < q; j++) {
    for (let c = 0; c < count; c++) difference[j * count + c] = ciede2000(50, bins.a[j], bins.b[j], 50, a[c], b[c]);
  }
  table = { a, b, difference, count };
  tables.set(bins, table);
  return table;
}

/**
 * Least expected CIEDE2000 colour per pixel. `logits` is [pixels, Q]; `classWeights` (one per bin, or
 * empty for an untrained network) undoes the rebalancing. Returns [pixels, 2] (a*, b*). Call inside tf.tidy.
 * @example
 * const ab = tf.tidy(() => leastCiede2000(logits, bins, model.classWeights));
 */
export function leastCiede2000(logits: tf.Tensor2D, bins: AbBins, classWeights: ArrayLike<number>): tf.Tensor2D {
  const table = decodingTable(bins);
  const corrected = classWeights.length === bins.count ? tf.sub(logits, tf.log(tf.tensor1d(Float32Array.from(classWeights)))) : logits;
  const risk = tf.matMul(tf.softmax(corrected), tf.tensor2d(table.difference, [bins.count, table.count]));
  const choice = tf.argMin(risk, 1);
  const candidates = tf.stack([tf.tensor1d(table.a), tf.tensor1d(table.b)], 1);
  return tf.gather(candidates, choice) as tf.Tensor2D;
}

/**
 * Annealed mean per pixel: the mean bin centre under softmax(logits / T). Returns [pixels, 2]. Call inside tf.tidy.
 * @example
 * const ab = tf.tidy(() => annealedMeanTensor(logits, bins, 0.38));
 */
export function annealedMeanTensor(logits: tf.Tensor2D, bins: AbBins, temperature: number): tf.Tensor2D {
  const centres = tf.stack([tf.tensor1d(bins.a), tf.tensor1d(bins.b)], 1);
  return tf.matMul(tf.softmax(tf.div(logits, temperature)), centres);
}
