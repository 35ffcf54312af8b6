/**
 * What runs the network, the decoding of its output and the backbone when predict() and backboneFeatures()
 * need them: TensorFlow.js, or, once initBackend has chosen it, ONNX Runtime on their ONNX exports. The exports are made in memory
 * from the live network and the backbone's files the first time each runs (a model folder holds no .onnx
 * file that could disagree with its weights), and a network's export is made again whenever its weights
 * have changed since (training assigns new tensors to its variables).
 */
import * as tf from '@tensorflow/tfjs';
import { ModelError } from '../errors.js';
import type { AbBins } from './bins.js';
import { type DecodingSpec, decodingToOnnx, softmaxToOnnx } from './onnx-decoding.js';
import { graphModelToOnnx, type GraphModelJson } from './onnx-graph.js';
import { networkToOnnx } from './onnx-network.js';
import { nearestToOnnx } from './onnx-nearest.js';
import { OnnxSession, type RuntimeOutput } from './onnx-runtime.js';

let onnxRuntime = false;

/** Sets whether the network and backbone run on ONNX Runtime (initBackend's choice). */
export function setOnnxInference(on: boolean): void {
  onnxRuntime = on;
}

/** True when the network and backbone run on ONNX Runtime. */
export function onnxInference(): boolean {
  return onnxRuntime;
}

interface NetworkSession {
  /** The weights' tensors when the export was made: assigning a variable replaces its tensor. */
  weights: object[];
  session: OnnxSession;
  inputs: string[];
  output: string;
}

const networks = new WeakMap<tf.LayersModel, NetworkSession>();
const graphs = new WeakMap<tf.GraphModel, { session: OnnxSession; input: string; outputs: string }>();

const RUN_ON_TFJS = "set KINHUE_BACKEND=wasm to run it on TensorFlow.js, and report the model to kinhue's maintainers";

/**
 * The session kept under `key`, made from `model()`'s bytes the first time: graphs built from a few settings
 * (bins and weights, a radius) are built and loaded once. One ONNX Runtime cannot load is a ModelError that
 * names `what` and the way back to TensorFlow.js.
 * @example
 * const session = keptRuntimeSession(softmaxes, 262, 'the softmax', () => softmaxToOnnx(262));
 */
export function keptRuntimeSession<K>(kept: Map<K, OnnxSession>, key: K, what: string, model: () => Uint8Array): OnnxSession {
  let session = kept.get(key);
  if (session) return session;
  try {
    session = new OnnxSession(model());
  } catch (error) {
    throw new ModelError(`${what} cannot run on ONNX Runtime: ${(error as Error).message}`, { hint: RUN_ON_TFJS, cause: error });
  }
  kept.set(key, session);
  return session;
}

function networkSession(network: tf.LayersModel): NetworkSession {
  const weights = network.weights.map((w) => w.read().dataId);
  const cached = networks.get(network);
  if (cached && cached.weights.length === weights.length && cached.weights.every((w, i) => w === weights[i])) return cached;
  cached?.session.dispose();
  let session: OnnxSession;
  try {
    session = new OnnxSession(networkToOnnx(network));
  } catch (error) {
    throw new ModelError(`the network cannot run on ONNX Runtime: ${(error as Error).message}`, { hint: RUN_ON_TFJS, cause: error });
  }
  const made = {
    weights,
    session,
    inputs: network.inputs.map((t) => t.sourceLayer.name),
    output: `${network.outputs[0]!.sourceLayer.name}:nhwc`,
  };
  networks.set(network, made);
  return made;
}

/**
 * The network's output for the given inputs (as network.predict takes them), on the chosen runtime.
 * Call inside tf.tidy.
 * @example
 * const logits = tf.tidy(() => runNetwork(net, networkInputs(input, 1, h, w)));
 */
export function runNetwork(network: tf.LayersModel, inputs: tf.Tensor4D | tf.Tensor4D[]): tf.Tensor4D {
  if (!onnxRuntime) return network.predict(inputs) as tf.Tensor4D;
  const out = networkOutput(network, inputs);
  return tf.tensor4d(out.data, out.dims as [number, number, number, number]);
}

/**
 * The network's output (channels-last) on ONNX Runtime, as plain values: predict reads them without
 * passing them through TensorFlow.js.
 * @example
 * const { data, dims } = networkOutput(net, networkInputs(input, 1, h, w));
 */
export function networkOutput(network: tf.LayersModel, inputs: tf.Tensor4D | tf.Tensor4D[]): RuntimeOutput {
  const { session, inputs: names, output } = networkSession(network);
  const list = Array.isArray(inputs) ? inputs : [inputs];
  const feeds = Object.fromEntries(names.map((name, i) => [name, { data: list[i]!.dataSync() as Float32Array, dims: list[i]!.shape }]));
  return session.run(feeds, [output])[0]!;
}

/** Decoding sessions per set of bins, by decoding, temperatures and class weights. */
const decodings = new WeakMap<AbBins, Map<string, OnnxSession>>();

/**
 * The decoding of `scores` ([pixels, Q], logits or pooled probabilities, as `spec.input` says) on ONNX Runtime:
 * `colour`, the chosen candidate per pixel (least-ciede2000) or a*b* pairs (annealed-mean), and `confidence`.
 * @example
 * const { colour, confidence } = runDecoding(scores, pixels, spec);
 */
export function runDecoding(scores: Float32Array, pixels: number, spec: DecodingSpec): { colour: Float32Array; confidence: Float32Array } {
  let byKey = decodings.get(spec.bins);
  if (!byKey) decodings.set(spec.bins, (byKey = new Map()));
  const key = [spec.decoding, spec.input, spec.temperature, spec.confidenceTemperature, Array.from(spec.classWeights).join(',')].join('|');
  const session = keptRuntimeSession(byKey, key, 'the decoding', () => decodingToOnnx(spec));
  const [colour, confidence] = session.run({ scores: { data: scores, dims: [pixels, spec.bins.count] } }, ['colour', 'confidence']);
  return { colour: colour!.data, confidence: confidence!.data };
}

/** A graph model with the bytes of its files (as a Backbone keeps them). */
export interface GraphModelFiles {
  graph: tf.GraphModel;
  topology: Uint8Array;
  weights: Uint8Array;
}

/**
 * The named nodes of a graph model for one input, on the chosen runtime. Call inside tf.tidy.
 * @example
 * const [a, b] = tf.tidy(() => runGraph(backbone, tf.zeros([1, 3, 416, 416]), ['n1', 'n2']));
 */
export function runGraph(model: GraphModelFiles, input: tf.Tensor, outputs: readonly string[]): tf.Tensor[] {
  if (!onnxRuntime) return model.graph.execute(input, [...outputs]) as tf.Tensor[];
  let made = graphs.get(model.graph);
  if (made?.outputs !== outputs.join('\n')) {
    made?.session.dispose();
    try {
      const json = JSON.parse(Buffer.from(model.topology).toString('utf8')) as GraphModelJson;
      const placeholder = json.modelTopology.node.find((n) => n.op === 'Placeholder');
      if (!placeholder) throw new Error('the graph has no input');
      made = {
        session: new OnnxSession(graphModelToOnnx(json, model.weights, outputs)),
        input: placeholder.name,
        outputs: outputs.join('\n'),
      };
    } catch (error) {
      throw new ModelError(`the backbone cannot run on ONNX Runtime: ${(error as Error).message}`, { hint: RUN_ON_TFJS, cause: error });
    }
    graphs.set(model.graph, made);
  }
  const feeds = { [made.input]: { data: input.dataSync() as Float32Array, dims: input.shape } };
  return made.session.run(feeds, outputs).map((o) => tf.tensor(o.data, o.dims));
}

/** Softmax sessions by the number of bins. */
const softmaxes = new Map<number, OnnxSession>();

/**
 * The softmax of each row of `logits` ([pixels, q]) on ONNX Runtime.
 * @example
 * const probabilities = runSoftmax(logits, pixels, 262);
 */
export function runSoftmax(logits: Float32Array, pixels: number, q: number): Float32Array {
  return keptRuntimeSession(softmaxes, q, 'the softmax', () => softmaxToOnnx(q)).run({ logits: { data: logits, dims: [pixels, q] } }, [
    'probabilities',
  ])[0]!.data;
}

/** Memory-search sessions by the remembered features and the number of neighbours. */
const searches = new WeakMap<Float32Array, Map<number, OnnxSession>>();

/**
 * The `k` remembered rows most similar (by dot product) to each of `rows` query rows, on ONNX Runtime:
 * their similarities in descending order and their row numbers, [rows, k] each.
 * @example
 * const { similarity, index } = runNearest(memory.features, memory.dims, query, rows, 16);
 */
export function runNearest(
  remembered: Float32Array,
  dims: number,
  query: Float32Array,
  rows: number,
  k: number,
): { similarity: Float32Array; index: Float32Array } {
  let byK = searches.get(remembered);
  if (!byK) searches.set(remembered, (byK = new Map()));
  const session = keptRuntimeSession(byK, k, "the colour memory's search", () =>
    nearestToOnnx(remembered, remembered.length / dims, dims, k),
  );
  const [similarity, index] = session.run({ query: { data: query, dims: [rows, dims] } }, ['similarity', 'index']);
  return { similarity: similarity!.data, index: index!.data };
}
