/**
 * Choosing one colour per pixel (decoding.ts) and the confidence (predict.ts) as an ONNX graph, so that
 * ONNX Runtime does on its own threads what TensorFlow.js does on WebAssembly: the least-CIEDE2000 choice
 * is a [pixels x Q] by [Q x candidates] matrix product, the largest piece of work after the network.
 * The graph is built from the same bins, candidate table and class weights decoding.ts uses, and gives
 * the same results to float32 rounding (tests/model-onnx).
 */
import type { AbBins } from './bins.js';
import { type Decoding, decodingTable } from './decoding.js';
import { encodeOnnxModel, type OnnxGraph } from './onnx-file.js';

/** What a decoding graph computes: the decoding and what it reads. */
export interface DecodingSpec {
  decoding: Decoding;
  /** What the graph is given: the network's logits, or probabilities (region-pooled), taken as their log. */
  input: 'logits' | 'probabilities';
  bins: AbBins;
  /** Rebalancing weights to undo (least-ciede2000), one per bin, or empty for none. */
  classWeights: ArrayLike<number>;
  /** Annealed-mean temperature. */
  temperature: number;
  /** Temperature of the distribution whose entropy gives the confidence. */
  confidenceTemperature: number;
}

/**
 * The ONNX model that takes `scores` [pixels, Q] (logits, or probabilities after region pooling, whose
 * log it reads with a floor of 1e-12 where a bin got nothing) and gives `colour`: the chosen candidate's index per pixel (least-ciede2000, as float) or a*b* [pixels, 2]
 * (annealed-mean); and `confidence` [pixels]: 1 - entropy / log Q, clipped to [0, 1].
 * @example
 * const bytes = decodingToOnnx({ decoding: 'annealed-mean', input: 'logits', bins: abBins(), classWeights: [], temperature: 0.38, confidenceTemperature: 1 });
 */
export function decodingToOnnx(spec: DecodingSpec): Uint8Array {
  const q = spec.bins.count;
  const graph: OnnxGraph = {
    name: `kinhue-decoding-${spec.decoding}`,
    nodes: [],
    initializers: [
      { name: 'axis1', dims: [1], type: 'int64', data: BigInt64Array.from([1n]) },
      { name: 'zero', dims: [], type: 'float32', data: Float32Array.from([0]) },
      { name: 'one', dims: [], type: 'float32', data: Float32Array.from([1]) },
      { name: 'inverseLogQ', dims: [], type: 'float32', data: Float32Array.from([1 / Math.log(q)]) },
    ],
    inputs: [{ name: 'scores', shape: ['pixels', q] }],
    outputs: [],
  };
  const { nodes, initializers } = graph;
  let scores = 'scores';
  if (spec.input === 'probabilities') {
    initializers.push({ name: 'floor', dims: [], type: 'float32', data: Float32Array.from([1e-12]) });
    nodes.push(
      { op: 'Max', inputs: ['scores', 'floor'], outputs: ['floored'] },
      { op: 'Log', inputs: ['floored'], outputs: ['logScores'] },
    );
    scores = 'logScores';
  }

  if (spec.decoding === 'least-ciede2000') {
    const table = decodingTable(spec.bins);
    initializers.push({ name: 'difference', dims: [q, table.count], type: 'float32', data: table.difference });
    let corrected = scores;
    if (spec.classWeights.length === q) {
      initializers.push({ name: 'logWeights', dims: [q], type: 'float32', data: Float32Array.from(spec.classWeights, Math.log) });
      nodes.push({ op: 'Sub', inputs: [scores, 'logWeights'], outputs: ['corrected'] });
      corrected = 'corrected';
    }
    nodes.push(
      { op: 'Softmax', inputs: [corrected], outputs: ['probability'], attributes: { axis: { int: -1 } } },
      { op: 'MatMul', inputs: ['probability', 'difference'], outputs: ['risk'] },
      { op: 'ArgMin', inputs: ['risk'], outputs: ['choice'], attributes: { axis: { int: 1 }, keepdims: { int: 0 } } },
      // Graph outputs are float32 here; candidate indices (under 1,000) are exact in it.
      { op: 'Cast', inputs: ['choice'], outputs: ['colour'], attributes: { to: { int: 1 } } },
    );
    graph.outputs.push({ name: 'colour', shape: ['pixels'] });
  } else {
    const centres = new Float32Array(q * 2);
    for (let j = 0; j < q; j++) {
      centres[2 * j] = spec.bins.a[j]!;
      centres[2 * j + 1] = spec.bins.b[j]!;
    }
    initializers.push(
      { name: 'centres', dims: [q, 2], type: 'float32', data: centres },
      { name: 'temperature', dims: [], type: 'float32', data: Float32Array.from([spec.temperature]) },
    );
    nodes.push(
      { op: 'Div', inputs: [scores, 'temperature'], outputs: ['annealed'] },
      { op: 'Softmax', inputs: ['annealed'], outputs: ['probability'], attributes: { axis: { int: -1 } } },
      { op: 'MatMul', inputs: ['probability', 'centres'], outputs: ['colour'] },
    );
    graph.outputs.push({ name: 'colour', shape: ['pixels', 2] });
  }

  let confidenceScores = scores;
  if (spec.confidenceTemperature !== 1) {
    initializers.push({ name: 'confidenceTemperature', dims: [], type: 'float32', data: Float32Array.from([spec.confidenceTemperature]) });
    nodes.push({ op: 'Div', inputs: [scores, 'confidenceTemperature'], outputs: ['confidenceScores'] });
    confidenceScores = 'confidenceScores';
  }
  nodes.push(
    { op: 'LogSoftmax', inputs: [confidenceScores], outputs: ['logP'], attributes: { axis: { int: -1 } } },
    { op: 'Exp', inputs: ['logP'], outputs: ['p'] },
    { op: 'Mul', inputs: ['p', 'logP'], outputs: ['pLogP'] },
    // sum p log p is minus the entropy: confidence = 1 - entropy / log Q = 1 + (sum p log p) / log Q.
    { op: 'ReduceSum', inputs: ['pLogP', 'axis1'], outputs: ['negEntropy'], attributes: { keepdims: { int: 0 } } },
    { op: 'Mul', inputs: ['negEntropy', 'inverseLogQ'], outputs: ['scaled'] },
    { op: 'Add', inputs: ['one', 'scaled'], outputs: ['unclipped'] },
    { op: 'Clip', inputs: ['unclipped', 'zero', 'one'], outputs: ['confidence'] },
  );
  graph.outputs.push({ name: 'confidence', shape: ['pixels'] });
  return encodeOnnxModel(graph);
}

/**
 * The ONNX model of a softmax over each row of `logits` [pixels, Q], giving `probabilities` (what region
 * pooling reads).
 * @example
 * const bytes = softmaxToOnnx(262);
 */
export function softmaxToOnnx(q: number): Uint8Array {
  return encodeOnnxModel({
    name: 'kinhue-softmax',
    nodes: [{ op: 'Softmax', inputs: ['logits'], outputs: ['probabilities'], attributes: { axis: { int: -1 } } }],
    initializers: [],
    inputs: [{ name: 'logits', shape: ['pixels', q] }],
    outputs: [{ name: 'probabilities', shape: ['pixels', q] }],
  });
}
