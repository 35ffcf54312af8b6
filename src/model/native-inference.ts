/**
 * What runs the network and the backbone when predict() and backboneFeatures() need them: TensorFlow.js,
 * or, once initBackend has chosen it, ONNX Runtime on their ONNX exports. The exports are made in memory
 * from the live network and the backbone's files the first time each runs (a model folder holds no .onnx
 * file that could disagree with its weights), and a network's export is made again whenever its weights
 * have changed since (training assigns new tensors to its variables).
 */
import * as tf from '@tensorflow/tfjs';
import { ModelError } from '../errors.js';
import { graphModelToOnnx, type GraphModelJson } from './onnx-graph.js';
import { networkToOnnx } from './onnx-network.js';
import { OnnxSession } from './onnx-runtime.js';

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
  const { session, inputs: names, output } = networkSession(network);
  const list = Array.isArray(inputs) ? inputs : [inputs];
  const feeds = Object.fromEntries(names.map((name, i) => [name, { data: list[i]!.dataSync() as Float32Array, dims: list[i]!.shape }]));
  const [out] = session.run(feeds, [output]);
  return tf.tensor4d(out!.data, out!.dims as [number, number, number, number]);
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
