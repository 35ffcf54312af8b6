/**
 * From an L* plane to a*b* and confidence at a quarter of its resolution: pad to the network's
 * multiple (edge pixels repeated), run the network, crop back, decode (see decoding.ts). With ONNX
 * Runtime chosen, the network and the decoding both run there (onnx-network.ts, onnx-decoding.ts).
 */
import * as tf from '@tensorflow/tfjs';
import { shrinkPlane } from '../colour/index.js';
import { type Backbone, type BackboneFeatures, backboneFeatures, borrowedInputs } from './backbone.js';
import { type AbBins, abBins } from './bins.js';
import {
  annealedMeanTensor,
  chooseDecoding,
  DEFAULT_DECODING,
  decodingTable,
  decodingWeights,
  leastCiede2000,
  type Decoding,
} from './decoding.js';
import { featuresFromLogits } from './cell-features.js';
import { DEFAULT_TEMPERATURE } from './encoding.js';
import { networkOutput, onnxInference, runDecoding, runNetwork, runSoftmax } from './native-inference.js';
import type { DecodingSpec } from './onnx-decoding.js';
import type { RuntimeOutput } from './onnx-runtime.js';
import { type PoolingSettings, poolRegions } from './region-pooling.js';
import { NETWORK_MULTIPLE, OUTPUT_STRIDE, toNetworkInput } from './network.js';
import type { KinhueModel } from './storage.js';
import { networkInputs } from './train-step.js';

/**
 * Temperature of the distribution whose entropy gives the confidence: 1, the network's own
 * distribution (tests/model-confidence checks that it ranks errors).
 */
export const CONFIDENCE_TEMPERATURE = 1;

export interface PredictOptions {
  /**
   * How a colour is chosen from the predicted distribution. Default: the model's own; 'annealed-mean'
   * when only a temperature is given.
   */
  decoding?: Decoding;
  /** Annealed-mean temperature; default the model's own (0.38 unless trained otherwise). */
  temperature?: number;
  /** How much class rebalancing least-CIEDE2000 decoding leaves in, 0 to 1 (decoding.ts). Default: the model's own. */
  vividness?: number;
  /** Rebalancing weights a bare network was trained with (a loaded model brings its own). */
  classWeights?: ArrayLike<number>;
  /** Region pooling before the colour is chosen (region-pooling.ts); false for none. Default: the model's own. */
  pooling?: PoolingSettings | false;
  /** For a network that reads a backbone: the picture's features, or the backbone to compute them with (a loaded model brings its own). */
  features?: BackboneFeatures;
  backbone?: Backbone;
  /** Also give the decoder's features at each output cell (cell-features.ts), for the colour memory. */
  cellFeatures?: boolean;
}

export interface Prediction {
  /** a* and b* at the output resolution, row-major. */
  a: Float32Array;
  b: Float32Array;
  /** Per-pixel confidence in [0, 1] at the output resolution. */
  confidence: Float32Array;
  /** Output size: ceil(input / 4) on each side. */
  width: number;
  height: number;
  /** With `cellFeatures`: the decoder's features, row-major [cells, dims]. */
  features?: { data: Float32Array; dims: number };
}

/** Copies a plane into a larger one, repeating the last column and row. */
function padPlane(src: Float32Array, width: number, height: number, pw: number, ph: number): Float32Array {
  const out = new Float32Array(pw * ph);
  for (let y = 0; y < ph; y++) {
    const sy = Math.min(y, height - 1) * width;
    const row = y * pw;
    out.set(src.subarray(sy, sy + width), row);
    const last = src[sy + width - 1];
    for (let x = width; x < pw; x++) out[row + x] = last;
  }
  return out;
}

interface Parts {
  network: tf.LayersModel;
  pooling?: PoolingSettings;
  backbone?: Backbone;
  bins: AbBins;
  decoding: Decoding;
  temperature: number;
  vividness: number;
  classWeights: ArrayLike<number>;
}

/** The network, bins and decoding defaults of a model or a bare network (bins from abBins()). */
function parts(model: KinhueModel | tf.LayersModel): Parts {
  if (model instanceof tf.LayersModel) {
    return { network: model, bins: abBins(), decoding: DEFAULT_DECODING, temperature: DEFAULT_TEMPERATURE, vividness: 0, classWeights: [] };
  }
  const { network, bins, meta, classWeights, backbone } = model;
  const { decoding, temperature, vividness, pooling } = meta;
  return { network, bins, decoding, temperature, vividness, classWeights, backbone, pooling };
}

/**
 * Predicts a*b* and confidence for one L* plane (0-100) of any size at a quarter of its
 * resolution. Accepts a loaded model or a bare network (then the default bins and temperature).
 * @example
 * const p = predict(model, L, 512, 384); // p.width === 128, p.height === 96
 */
export function predict(
  model: KinhueModel | tf.LayersModel,
  L: Float32Array,
  width: number,
  height: number,
  options: PredictOptions = {},
): Prediction {
  if (!(width >= 1 && height >= 1) || L.length !== width * height) {
    throw new RangeError(`predict: L has ${L.length} values for a ${width} x ${height} image`);
  }
  const own = parts(model);
  const { network, bins } = own;
  const temperature = options.temperature ?? own.temperature;
  const decoding = chooseDecoding(options, own.decoding);
  const vividness = options.vividness ?? own.vividness;
  if (!(temperature > 0)) throw new RangeError(`predict: temperature must be above 0, got ${temperature}`);
  if (!(vividness >= 0 && vividness <= 1)) throw new RangeError(`predict: vividness must be from 0 to 1, got ${vividness}`);
  const classWeights = decodingWeights(options.classWeights ?? own.classWeights, vividness);
  const pw = Math.ceil(width / NETWORK_MULTIPLE) * NETWORK_MULTIPLE;
  const ph = Math.ceil(height / NETWORK_MULTIPLE) * NETWORK_MULTIPLE;
  const ow = Math.ceil(width / OUTPUT_STRIDE);
  const oh = Math.ceil(height / OUTPUT_STRIDE);
  const q = bins.count;
  const input = toNetworkInput(pw === width && ph === height ? L : padPlane(L, width, height, pw, ph));
  const borrowed =
    network.inputs.length > 1 ? borrowedFor(L, width, height, pw, ph, options.features, options.backbone ?? own.backbone) : undefined;
  const pooling = options.pooling ?? own.pooling;
  if (onnxInference()) {
    const spec = { decoding, bins, classWeights, temperature, confidenceTemperature: CONFIDENCE_TEMPERATURE };
    const at = { L, width, height, ow, oh, pooling, cellFeatures: options.cellFeatures };
    return predictOnRuntime(network, networkInputs(input, 1, ph, pw, borrowed), at, spec);
  }
  const raw = tf.tidy(() => {
    const logits = runNetwork(network, networkInputs(input, 1, ph, pw, borrowed));
    return tf.reshape(tf.slice(logits, [0, 0, 0, 0], [1, oh, ow, q]), [oh * ow, q]) as tf.Tensor2D;
  });
  const features = options.cellFeatures ? featuresFromLogits(network, raw) : undefined;
  // Pooled distributions stand in for the network's own from here on: as log-probabilities, which
  // every decoding and the confidence read as logits.
  const scores = pooling ? pooledLogits(raw, q, shrinkPlane(L, width, height, ow, oh), ow, oh, pooling) : raw;
  const [ab, conf] = tf.tidy(() => {
    const colour =
      decoding === 'annealed-mean' ? annealedMeanTensor(scores, bins, temperature) : leastCiede2000(scores, bins, classWeights);
    const logp = tf.logSoftmax(CONFIDENCE_TEMPERATURE === 1 ? scores : tf.div(scores, CONFIDENCE_TEMPERATURE));
    const entropy = tf.neg(tf.sum(tf.mul(tf.exp(logp), logp), -1));
    const confidence = tf.clipByValue(tf.sub(1, tf.div(entropy, Math.log(q))), 0, 1);
    return [colour, confidence];
  });
  tf.dispose([raw, scores]);
  const abData = ab.dataSync() as Float32Array;
  const confidence = Float32Array.from(conf.dataSync() as Float32Array);
  ab.dispose();
  conf.dispose();
  const a = new Float32Array(ow * oh);
  const b = new Float32Array(ow * oh);
  for (let i = 0; i < ow * oh; i++) {
    a[i] = abData[2 * i];
    b[i] = abData[2 * i + 1];
  }
  return { a, b, confidence, width: ow, height: oh, ...(features ? { features } : {}) };
}

/**
 * predict() on ONNX Runtime from the network's inputs on: the network, region pooling (in JavaScript, as
 * on TensorFlow.js) and the decoding, with the values handed from one to the next as plain arrays.
 */
function predictOnRuntime(
  network: tf.LayersModel,
  inputs: tf.Tensor4D | tf.Tensor4D[],
  at: { L: Float32Array; width: number; height: number; ow: number; oh: number; pooling?: PoolingSettings | false; cellFeatures?: boolean },
  spec: Omit<DecodingSpec, 'input'>,
): Prediction {
  const { ow, oh } = at;
  const q = spec.bins.count;
  let out: RuntimeOutput;
  try {
    out = networkOutput(network, inputs);
  } finally {
    tf.dispose(inputs);
  }
  // The output is [1, padded height / 4, padded width / 4, Q]: keep the rows and columns of the picture.
  const stride = out.dims[2]!;
  const scores = new Float32Array(oh * ow * q);
  for (let y = 0; y < oh; y++) scores.set(out.data.subarray(y * stride * q, (y * stride + ow) * q), y * ow * q);
  const features = at.cellFeatures ? featuresOfScores(network, scores, ow * oh, q) : undefined;
  const pooled = at.pooling
    ? poolRegions(runSoftmax(scores, ow * oh, q), q, shrinkPlane(at.L, at.width, at.height, ow, oh), ow, oh, at.pooling)
    : undefined;
  const { colour, confidence } = runDecoding(pooled ?? scores, ow * oh, { ...spec, input: pooled ? 'probabilities' : 'logits' });
  const a = new Float32Array(ow * oh);
  const b = new Float32Array(ow * oh);
  if (spec.decoding === 'least-ciede2000') {
    const table = decodingTable(spec.bins);
    for (let i = 0; i < ow * oh; i++) {
      a[i] = table.a[colour[i]!]!;
      b[i] = table.b[colour[i]!]!;
    }
  } else {
    for (let i = 0; i < ow * oh; i++) {
      a[i] = colour[2 * i]!;
      b[i] = colour[2 * i + 1]!;
    }
  }
  return { a, b, confidence: Float32Array.from(confidence), width: ow, height: oh, ...(features ? { features } : {}) };
}

/** The decoder's features behind logits held in a plain array ([cells, q]). */
function featuresOfScores(network: tf.LayersModel, scores: Float32Array, cells: number, q: number): { data: Float32Array; dims: number } {
  const logits = tf.tensor2d(scores, [cells, q]);
  try {
    return featuresFromLogits(network, logits);
  } finally {
    logits.dispose();
  }
}

/** The backbone's inputs for a picture padded from width x height to pw x ph (the padding repeats the edge). */
function borrowedFor(
  L: Float32Array,
  width: number,
  height: number,
  pw: number,
  ph: number,
  features?: BackboneFeatures,
  backbone?: Backbone,
) {
  if (!features && !backbone) throw new RangeError('predict: this network reads a backbone, and none was given');
  const f = features ?? backboneFeatures(backbone!, L, width, height);
  return borrowedInputs(f, { x: 0, y: 0, width: pw / width, height: ph / height }, pw, ph);
}

/** Log of the region-pooled distributions of `logits` ([pixels, q] over a width x height grid). */
function pooledLogits(
  logits: tf.Tensor2D,
  q: number,
  guide: Float32Array,
  width: number,
  height: number,
  settings: PoolingSettings,
): tf.Tensor2D {
  // Read outside tf.tidy: tidy walks what it returns looking for tensors, a million-element array index by index.
  const softmax = tf.softmax(logits);
  const probabilities = softmax.dataSync() as Float32Array;
  softmax.dispose();
  const pooled = poolRegions(probabilities, q, guide, width, height, settings);
  // A floor keeps the log finite where a bin got nothing (far below any probability that matters).
  for (let i = 0; i < pooled.length; i++) pooled[i] = Math.log(Math.max(pooled[i]!, 1e-12));
  return tf.tensor2d(pooled, [width * height, q]);
}
