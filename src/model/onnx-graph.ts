/**
 * A TensorFlow.js graph model (the backbone's backbone.json and backbone.bin) as an ONNX graph: the nodes
 * that the named outputs depend on, translated one by one from the graph JSON, with the weights as the
 * file holds them (dequantised as TensorFlow.js does). TensorFlow's channels-last operations are wrapped in
 * transposes to ONNX's channels-first ones; ONNX Runtime's optimiser removes the pairs that cancel. An
 * operation not listed here stops the export with its name.
 */
import * as tf from '@tensorflow/tfjs';
import { encodeOnnxModel, type OnnxGraph, type OnnxNode, type OnnxTensor } from './onnx-file.js';
import { OnnxExportError } from './onnx-network.js';

/** The parts of a graph model's JSON the export reads. */
export interface GraphModelJson {
  modelTopology: { node: GraphNode[] };
  weightsManifest: { weights: tf.io.WeightsManifestEntry[] }[];
}

export interface GraphNode {
  name: string;
  op: string;
  input?: string[];
  attr?: Record<string, AttrValue>;
}

export interface AttrValue {
  i?: string;
  f?: number;
  s?: string;
  b?: boolean;
  list?: { i?: string[] };
  shape?: { dim?: { size: string }[] };
}

interface Constant {
  dims: number[];
  data: Float32Array | Int32Array;
}

const TO_NCHW = [0, 3, 1, 2];
const TO_NHWC = [0, 2, 3, 1];

/**
 * The ONNX model computing `outputs` (node names) of a graph model from its Placeholder inputs.
 * @example
 * const bytes = graphModelToOnnx(JSON.parse(topologyText), weightBytes, ['PartitionedCall/Concat_27']);
 */
export function graphModelToOnnx(json: GraphModelJson, weightData: Uint8Array, outputs: readonly string[]): Uint8Array {
  const nodes = new Map(json.modelTopology.node.map((n) => [n.name, n]));
  const constants = readConstants(json, weightData);
  const graph: OnnxGraph = { name: 'graph-model', nodes: [], initializers: [], inputs: [], outputs: [] };
  const emitted = new Set<string>();
  const done = new Set<string>();
  const add = (node: OnnxNode) => graph.nodes.push(node);

  /** A node's input as an ONNX value (a constant becomes an initializer the first time it is used). */
  const value = (ref: string): string => {
    const [name, index] = split(ref);
    const c = constants.get(name);
    if (c && !emitted.has(name)) {
      emitted.add(name);
      graph.initializers.push(initializer(name, c));
    }
    return index === 0 ? name : `${name}:${index}`;
  };
  /** The values of a constant input, for operations whose ONNX form takes them as attributes. */
  const constant = (node: GraphNode, k: number): number[] => {
    const name = split(node.input![k]!)[0];
    const c = constants.get(name);
    if (!c) throw new OnnxExportError(`node ${node.name} (${node.op}) takes a computed ${name} where the export expects a constant`);
    return Array.from(c.data);
  };
  const int64 = (name: string, values: number[]): string => {
    if (!emitted.has(name)) {
      emitted.add(name);
      graph.initializers.push({ name, dims: [values.length], type: 'int64', data: BigInt64Array.from(values.map(BigInt)) });
    }
    return name;
  };
  /** Runs a channels-first ONNX operation on a channels-last value. */
  const channelsFirst = (node: GraphNode, op: OnnxNode): void => {
    const nhwc = dataFormat(node) === 'NHWC';
    const input = nhwc ? `${node.name}/nchw` : value(node.input![0]!);
    if (nhwc) add({ op: 'Transpose', inputs: [value(node.input![0]!)], outputs: [input], attributes: { perm: { ints: TO_NCHW } } });
    op.inputs[0] = input;
    op.outputs = [nhwc ? `${node.name}/out` : node.name];
    add(op);
    if (nhwc) add({ op: 'Transpose', inputs: [op.outputs[0]!], outputs: [node.name], attributes: { perm: { ints: TO_NHWC } } });
  };

  const visit = (name: string): void => {
    if (done.has(name)) return;
    done.add(name);
    const node = nodes.get(name);
    if (!node) throw new OnnxExportError(`the graph has no node ${name}`);
    const inputs = (node.input ?? []).filter((i) => !i.startsWith('^'));
    for (const i of inputs) visit(split(i)[0]);
    const a = node.attr ?? {};
    switch (node.op) {
      case 'Const':
        if (!constants.has(name)) throw new OnnxExportError(`constant ${name} is not in the weights file`);
        return;
      case 'Placeholder': {
        const dims = a.shape?.shape?.dim?.map((d, k) => (Number(d.size) >= 0 ? Number(d.size) : `${name}_${k}`));
        graph.inputs.push({ name, ...(dims ? { shape: dims } : {}) });
        return;
      }
      case 'Identity':
        add({ op: 'Identity', inputs: [value(inputs[0]!)], outputs: [name] });
        return;
      case 'Add':
      case 'AddV2':
        add({ op: 'Add', inputs: inputs.map(value), outputs: [name] });
        return;
      case 'Relu':
      case 'Sigmoid':
        add({ op: node.op, inputs: [value(inputs[0]!)], outputs: [name] });
        return;
      case 'LeakyRelu':
        add({ op: 'LeakyRelu', inputs: [value(inputs[0]!)], outputs: [name], attributes: { alpha: { float: a.alpha?.f ?? 0.2 } } });
        return;
      case 'Transpose':
        add({ op: 'Transpose', inputs: [value(inputs[0]!)], outputs: [name], attributes: { perm: { ints: constant(node, 1) } } });
        return;
      case 'ConcatV2': {
        const n = Number(a.N?.i ?? inputs.length - 1);
        add({ op: 'Concat', inputs: inputs.slice(0, n).map(value), outputs: [name], attributes: { axis: { int: constant(node, n)[0]! } } });
        return;
      }
      case 'SplitV': {
        const sizes = constant(node, 1);
        const outs = sizes.map((_, k) => (k === 0 ? name : `${name}:${k}`));
        add({
          op: 'Split',
          inputs: [value(inputs[0]!), int64(`${name}/sizes`, sizes)],
          outputs: outs,
          attributes: { axis: { int: constant(node, 2)[0]! } },
        });
        return;
      }
      case 'Pad':
      case 'PadV2': {
        // TensorFlow: [[before, after] per axis]; ONNX: all befores, then all afters.
        const p = constant(node, 1);
        const pads = [...p.filter((_, k) => k % 2 === 0), ...p.filter((_, k) => k % 2 === 1)];
        const padInputs = [value(inputs[0]!), int64(`${name}/pads`, pads)];
        if (node.op === 'PadV2') padInputs.push(value(inputs[2]!));
        add({ op: 'Pad', inputs: padInputs, outputs: [name], attributes: { mode: { string: 'constant' } } });
        return;
      }
      case 'Conv2D': {
        const nhwc = dataFormat(node) === 'NHWC';
        const at = (list: string[] | undefined) => (list ? (nhwc ? [list[1], list[2]] : [list[2], list[3]]).map(Number) : [1, 1]);
        // TensorFlow's filter is [kh, kw, in, out]; ONNX's [out, in, kh, kw].
        const filter = `${name}/filter`;
        add({ op: 'Transpose', inputs: [value(inputs[1]!)], outputs: [filter], attributes: { perm: { ints: [3, 2, 0, 1] } } });
        channelsFirst(node, {
          op: 'Conv',
          name,
          inputs: ['', filter],
          outputs: [],
          attributes: {
            strides: { ints: at(a.strides?.list?.i) },
            dilations: { ints: at(a.dilations?.list?.i) },
            auto_pad: { string: autoPad(node) },
          },
        });
        return;
      }
      case 'MaxPool': {
        const nhwc = dataFormat(node) === 'NHWC';
        const at = (list: string[] | undefined) => (nhwc ? [list![1], list![2]] : [list![2], list![3]]).map(Number);
        channelsFirst(node, {
          op: 'MaxPool',
          inputs: [''],
          outputs: [],
          attributes: {
            kernel_shape: { ints: at(a.ksize?.list?.i) },
            strides: { ints: at(a.strides?.list?.i) },
            auto_pad: { string: autoPad(node) },
          },
        });
        return;
      }
      case 'ResizeBilinear': {
        // Always channels-last in TensorFlow; the output size is a constant [height, width].
        const transform = a.align_corners?.b ? 'align_corners' : a.half_pixel_centers?.b ? 'half_pixel' : 'asymmetric';
        channelsFirst(
          { ...node, attr: { ...a, data_format: { s: btoa('NHWC') } } },
          {
            op: 'Resize',
            inputs: ['', '', '', int64(`${name}/sizes`, constant(node, 1))],
            outputs: [],
            attributes: { mode: { string: 'linear' }, coordinate_transformation_mode: { string: transform }, axes: { ints: [2, 3] } },
          },
        );
        return;
      }
      default:
        throw new OnnxExportError(`node ${name} is a ${node.op}, which the ONNX export does not know`);
    }
  };

  for (const out of outputs) {
    visit(out);
    graph.outputs.push({ name: out });
  }
  return encodeOnnxModel(graph);
}

/** A node reference "name", "name:k" or "^name" as the name and output index. */
function split(ref: string): [string, number] {
  const clean = ref.replace(/^\^/, '');
  const colon = clean.lastIndexOf(':');
  return colon > 0 && /^\d+$/.test(clean.slice(colon + 1)) ? [clean.slice(0, colon), Number(clean.slice(colon + 1))] : [clean, 0];
}

function stringAttr(node: GraphNode, key: string): string | undefined {
  const s = node.attr?.[key]?.s;
  return s === undefined ? undefined : atob(s);
}

function dataFormat(node: GraphNode): string {
  return stringAttr(node, 'data_format') ?? 'NHWC';
}

function autoPad(node: GraphNode): string {
  const padding = stringAttr(node, 'padding');
  if (padding === 'VALID') return 'VALID';
  if (padding === 'SAME') return 'SAME_UPPER';
  throw new OnnxExportError(`node ${node.name} pads ${padding ?? 'in no stated way'}; the export knows VALID and SAME`);
}

/** Every constant of the weights file, dequantised by TensorFlow.js's own reader. */
function readConstants(json: GraphModelJson, weightData: Uint8Array): Map<string, Constant> {
  const specs = json.weightsManifest.flatMap((g) => g.weights);
  const buffer = weightData.buffer.slice(weightData.byteOffset, weightData.byteOffset + weightData.byteLength) as ArrayBuffer;
  const tensors = tf.io.decodeWeights(buffer, specs);
  const out = new Map<string, Constant>();
  for (const [name, t] of Object.entries(tensors)) {
    if (t.dtype !== 'float32' && t.dtype !== 'int32')
      throw new OnnxExportError(`constant ${name} is ${t.dtype}; the export knows float32 and int32`);
    out.set(name, { dims: t.shape, data: t.dataSync() as Float32Array | Int32Array });
    t.dispose();
  }
  return out;
}

function initializer(name: string, c: Constant): OnnxTensor {
  return c.data instanceof Float32Array
    ? { name, dims: c.dims, type: 'float32', data: c.data }
    : { name, dims: c.dims, type: 'int64', data: BigInt64Array.from(c.data, (v) => BigInt(v)) };
}
