/**
 * kinhue's own network as an ONNX graph, read from the TensorFlow.js model itself: its layers in order,
 * each layer's configuration and current weights. Whatever network.ts builds is exported as built; a layer
 * kind not listed here stops the export with its name, so a change to the network cannot be run wrongly.
 * Inputs and output keep TensorFlow.js's channels-last layout; inside, the graph runs channels-first, the
 * layout ONNX convolutions take.
 */
import type * as tf from '@tensorflow/tfjs';
import { encodeOnnxModel, type OnnxGraph, type OnnxNode, type OnnxTensor } from './onnx-file.js';

/** Channels-last to channels-first and back. */
const TO_NCHW = [0, 3, 1, 2];
const TO_NHWC = [0, 2, 3, 1];

/** The network's layer kinds the export knows. */
const EXPORTED = ['InputLayer', 'Conv2D', 'Concatenate', 'UpSampling2D'] as const;

/** Why a network cannot be exported. */
export class OnnxExportError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'OnnxExportError';
  }
}

interface ConvConfig {
  filters: number;
  kernelSize: number[];
  strides: number[];
  padding: string;
  dataFormat?: string;
  dilationRate?: number | number[];
  activation?: string;
  useBias?: boolean;
}

/**
 * The ONNX model of a TensorFlow.js layers network, with its weights as they are now.
 * @example
 * const bytes = networkToOnnx(createNetwork({ width: 8 }));
 */
export function networkToOnnx(network: tf.LayersModel): Uint8Array {
  const graph: OnnxGraph = { name: network.name, nodes: [], initializers: [], inputs: [], outputs: [] };
  /** ONNX value (channels-first) of each symbolic tensor, by its id. */
  const values = new Map<number, string>();
  const onnxValueOf = (t: tf.SymbolicTensor): string => {
    const v = values.get(t.id);
    if (v === undefined) throw new OnnxExportError(`the network's tensor ${t.name} is used before it is made`);
    return v;
  };
  const add = (node: OnnxNode) => graph.nodes.push(node);

  for (const layer of network.layers) {
    const kind = layer.getClassName();
    if (!(EXPORTED as readonly string[]).includes(kind)) {
      throw new OnnxExportError(`layer ${layer.name} is a ${kind}, which the ONNX export does not know (it knows ${EXPORTED.join(', ')})`);
    }
    if (layer.inboundNodes.length !== 1)
      throw new OnnxExportError(`layer ${layer.name} is applied ${layer.inboundNodes.length} times; the export expects once`);
    const inbound = layer.inboundNodes[0]!;
    const output = layer.name;
    if (kind === 'InputLayer') {
      const shape = inbound.outputTensors[0]!.shape;
      graph.inputs.push({ name: layer.name, shape: ['batch', `${layer.name}_height`, `${layer.name}_width`, shape.at(-1) as number] });
      add({ op: 'Transpose', inputs: [layer.name], outputs: [output + ':nchw'], attributes: { perm: { ints: TO_NCHW } } });
      values.set(inbound.outputTensors[0]!.id, output + ':nchw');
      continue;
    }
    const inputs = inbound.inputTensors.map(onnxValueOf);
    const config = layer.getConfig() as Record<string, unknown>;
    if (config.dataFormat !== undefined && config.dataFormat !== 'channelsLast') {
      throw new OnnxExportError(`layer ${layer.name} is ${String(config.dataFormat)}; the export expects channelsLast`);
    }
    switch (kind) {
      case 'Conv2D':
        convolution(layer, config as unknown as ConvConfig, inputs[0]!, output, graph);
        break;
      case 'Concatenate': {
        const axis = config.axis as number;
        // Channels-last axes 1, 2, 3 (or -1) are channels-first 2, 3, 1.
        const nchwAxis = [0, 2, 3, 1][axis < 0 ? axis + 4 : axis];
        add({ op: 'Concat', inputs, outputs: [output], attributes: { axis: { int: nchwAxis! } } });
        break;
      }
      case 'UpSampling2D': {
        const size = config.size as number[];
        if ((config.interpolation ?? 'nearest') !== 'nearest')
          throw new OnnxExportError(`layer ${layer.name} upsamples by ${String(config.interpolation)}; the export knows nearest`);
        const scales = `${layer.name}/scales`;
        graph.initializers.push({ name: scales, dims: [4], type: 'float32', data: Float32Array.from([1, 1, size[0]!, size[1]!]) });
        // TensorFlow.js repeats each value: source index floor(i / size), ONNX's asymmetric nearest with floor.
        add({
          op: 'Resize',
          inputs: [inputs[0]!, '', scales],
          outputs: [output],
          attributes: {
            mode: { string: 'nearest' },
            coordinate_transformation_mode: { string: 'asymmetric' },
            nearest_mode: { string: 'floor' },
          },
        });
        break;
      }
    }
    values.set(inbound.outputTensors[0]!.id, output);
  }

  // The graph's inputs in the network's own order, as predict passes them.
  const order = network.inputs.map((t) => t.sourceLayer.name);
  graph.inputs.sort((x, y) => order.indexOf(x.name) - order.indexOf(y.name));
  for (const out of network.outputs) {
    const name = out.sourceLayer.name;
    graph.outputs.push({ name: `${name}:nhwc`, shape: ['batch', 'height', 'width', out.shape.at(-1) as number] });
    add({ op: 'Transpose', inputs: [onnxValueOf(out)], outputs: [`${name}:nhwc`], attributes: { perm: { ints: TO_NHWC } } });
  }
  return encodeOnnxModel(graph);
}

/** A Conv2D layer: its kernel from [kh, kw, in, out] to ONNX's [out, in, kh, kw], its bias, its activation. */
function convolution(layer: tf.layers.Layer, config: ConvConfig, input: string, output: string, graph: OnnxGraph): void {
  const weights = layer.getWeights();
  const kernel = weights[0]!;
  const [kh, kw, ci, co] = kernel.shape as [number, number, number, number];
  const k = kernel.dataSync() as Float32Array;
  const oihw = new Float32Array(k.length);
  for (let y = 0; y < kh; y++)
    for (let x = 0; x < kw; x++)
      for (let i = 0; i < ci; i++)
        for (let o = 0; o < co; o++) oihw[((o * ci + i) * kh + y) * kw + x] = k[((y * kw + x) * ci + i) * co + o]!;
  const tensors: OnnxTensor[] = [{ name: `${layer.name}/kernel`, dims: [co, ci, kh, kw], type: 'float32', data: oihw }];
  if (config.useBias !== false) {
    tensors.push({
      name: `${layer.name}/bias`,
      dims: [co],
      type: 'float32',
      data: Float32Array.from(weights[1]!.dataSync() as Float32Array),
    });
  }
  graph.initializers.push(...tensors);
  const dilation = typeof config.dilationRate === 'number' ? [config.dilationRate, config.dilationRate] : (config.dilationRate ?? [1, 1]);
  const activation = config.activation ?? 'linear';
  if (activation !== 'linear' && activation !== 'relu')
    throw new OnnxExportError(`layer ${layer.name} has activation ${activation}; the export knows relu and linear`);
  const convOut = activation === 'relu' ? `${output}/conv` : output;
  graph.nodes.push({
    op: 'Conv',
    name: layer.name,
    inputs: [input, ...tensors.map((t) => t.name)],
    outputs: [convOut],
    attributes: {
      kernel_shape: { ints: [kh, kw] },
      strides: { ints: config.strides },
      dilations: { ints: dilation },
      // TensorFlow's 'same' puts the odd padding pixel after, as SAME_UPPER does.
      auto_pad: { string: config.padding === 'same' ? 'SAME_UPPER' : 'VALID' },
    },
  });
  if (activation === 'relu') graph.nodes.push({ op: 'Relu', inputs: [convOut], outputs: [output] });
}
