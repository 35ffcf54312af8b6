/**
 * The network's own features at each output cell: the decoder's last feature map, the one the class
 * logits are read from. The logits layer is a 1 x 1 convolution (logits = f W + bias, W of d x Q with
 * d < Q), so the map is recovered exactly from the logits any runtime gives back:
 * f = (logits - bias) W^T (W W^T)^-1. Nothing runs twice and every runtime (TensorFlow.js, ONNX Runtime)
 * serves alike.
 */
import * as tf from '@tensorflow/tfjs';

/** Name of the layer that turns the decoder's features into class logits (network.ts). */
const LOGITS_LAYER = 'logits';

interface Recovery {
  /** The weights' tensors the matrices were made from: training replaces them. */
  kernel: object;
  /** Q x d: from logits less the bias to features. */
  project: tf.Tensor2D;
  bias: tf.Tensor1D;
  dims: number;
}

const recoveries = new WeakMap<tf.LayersModel, Recovery>();

/**
 * The number of feature channels the network's logits are read from.
 * @example
 *   featureDims(network); // 48 for the shipped model
 */
export function featureDims(network: tf.LayersModel): number {
  return (network.getLayer(LOGITS_LAYER).getWeights()[0]!.shape as number[])[2]!;
}

function recovery(network: tf.LayersModel): Recovery {
  const [kernelTensor, biasTensor] = network.getLayer(LOGITS_LAYER).getWeights() as [tf.Tensor4D, tf.Tensor1D];
  const kernel = kernelTensor.dataId;
  const cached = recoveries.get(network);
  if (cached && cached.kernel === kernel) return cached;
  if (cached) tf.dispose([cached.project, cached.bias]);
  const [, , d, q] = kernelTensor.shape;
  const W = kernelTensor.dataSync(); // d x q, row-major
  // Gram matrix W W^T in float64, a little ridge in case two channels are (nearly) alike.
  const gram = new Float64Array(d * d);
  for (let i = 0; i < d; i++)
    for (let j = 0; j <= i; j++) {
      let s = 0;
      for (let k = 0; k < q; k++) s += W[i * q + k]! * W[j * q + k]!;
      gram[i * d + j] = gram[j * d + i] = s;
    }
  let trace = 0;
  for (let i = 0; i < d; i++) trace += gram[i * d + i]!;
  for (let i = 0; i < d; i++) gram[i * d + i]! += (1e-9 * trace) / d;
  const inverse = invertSymmetric(gram, d);
  const project = new Float32Array(q * d);
  for (let k = 0; k < q; k++)
    for (let j = 0; j < d; j++) {
      let s = 0;
      for (let i = 0; i < d; i++) s += W[i * q + k]! * inverse[i * d + j]!;
      project[k * d + j] = s;
    }
  const made: Recovery = { kernel, project: tf.tensor2d(project, [q, d]), bias: tf.tensor1d(biasTensor.dataSync()), dims: d };
  recoveries.set(network, made);
  return made;
}

/** Inverse of a symmetric positive definite matrix (Cholesky), float64. */
function invertSymmetric(m: Float64Array, n: number): Float64Array {
  const l = new Float64Array(n * n);
  for (let i = 0; i < n; i++)
    for (let j = 0; j <= i; j++) {
      let s = m[i * n + j]!;
      for (let k = 0; k < j; k++) s -= l[i * n + k]! * l[j * n + k]!;
      l[i * n + j] = i === j ? Math.sqrt(Math.max(s, 1e-300)) : s / l[j * n + j]!;
    }
  // Columns of L^-1 by forward substitution, then inverse = L^-T L^-1.
  const li = new Float64Array(n * n);
  for (let c = 0; c < n; c++)
    for (let i = c; i < n; i++) {
      let s = i === c ? 1 : 0;
      for (let k = c; k < i; k++) s -= l[i * n + k]! * li[k * n + c]!;
      li[i * n + c] = s / l[i * n + i]!;
    }
  const out = new Float64Array(n * n);
  for (let i = 0; i < n; i++)
    for (let j = 0; j < n; j++) {
      let s = 0;
      for (let k = Math.max(i, j); k < n; k++) s += li[k * n + i]! * li[k * n + j]!;
      out[i * n + j] = s;
    }
  return out;
}

/**
 * The decoder's features behind `logits` ([cells, Q], as the network gave them, before any pooling),
 * row-major [cells, d]. The map came out of a ReLU, so the few values a rounding sends below 0 are set to 0.
 * @example
 *   const { data, dims } = featuresFromLogits(network, logits); // data.length === cells * dims
 */
export function featuresFromLogits(network: tf.LayersModel, logits: tf.Tensor2D): { data: Float32Array; dims: number } {
  const r = recovery(network);
  const features = tf.tidy(() => tf.relu(tf.matMul(tf.sub(logits, r.bias), r.project)));
  const data = features.dataSync() as Float32Array;
  features.dispose();
  return { data, dims: r.dims };
}
