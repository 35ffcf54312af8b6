/**
 * The detector's opening and closing as one ONNX graph, so ONNX Runtime computes them on its own threads
 * when restore runs the networks there. A square minimum or maximum is a 1 x k maximum along rows then
 * k x 1 along columns (a minimum is the maximum of the negated values); MaxPool leaves the padding out of
 * each window, and a window that reaches past the edge always holds the edge pixel, so the result is the
 * same as repeating the border pixel (morphology.ts). Max, min and negation are exact in float32: the
 * values equal morphology.ts's bit for bit (tests/repair).
 */
import { encodeOnnxModel, type OnnxNode } from '../model/onnx-file.js';
import { keptRuntimeSession, onnxInference } from '../model/native-inference.js';
import type { OnnxSession } from '../model/onnx-runtime.js';
import { closing, opening } from './morphology.js';

/** Sessions by radius. */
const sessions = new Map<number, OnnxSession>();

/** The ONNX model giving `opening` and `closing` of `plane` [1, 1, height, width] over a (2r+1)-pixel square. */
function morphologyToOnnx(r: number): Uint8Array {
  const k = 2 * r + 1;
  const nodes: OnnxNode[] = [];
  let made = 0;
  const node = (op: string, input: string, attributes?: OnnxNode['attributes']): string => {
    const output = `v${made++}`;
    nodes.push({ op, inputs: [input], outputs: [output], ...(attributes ? { attributes } : {}) });
    return output;
  };
  const maximum = (input: string): string => {
    const rows = node('MaxPool', input, { kernel_shape: { ints: [1, k] }, pads: { ints: [0, r, 0, r] } });
    return node('MaxPool', rows, { kernel_shape: { ints: [k, 1] }, pads: { ints: [r, 0, r, 0] } });
  };
  const minimum = (input: string): string => node('Neg', maximum(node('Neg', input)));
  const opening = maximum(minimum('plane'));
  const closing = minimum(maximum('plane'));
  nodes.push({ op: 'Identity', inputs: [opening], outputs: ['opening'] }, { op: 'Identity', inputs: [closing], outputs: ['closing'] });
  return encodeOnnxModel({
    name: 'kinhue-top-hat-bases',
    nodes,
    initializers: [],
    inputs: [{ name: 'plane', shape: [1, 1, 'height', 'width'] }],
    outputs: [
      { name: 'opening', shape: [1, 1, 'height', 'width'] },
      { name: 'closing', shape: [1, 1, 'height', 'width'] },
    ],
  });
}

/**
 * Opening and closing of a plane over a (2r+1)-pixel square, on the runtime the networks run on: ONNX
 * Runtime when it was chosen, else morphology.ts.
 * @example
 * const { open, close } = openingAndClosing(smooth, w, h, 5);
 */
export function openingAndClosing(src: Float32Array, w: number, h: number, r: number): { open: Float32Array; close: Float32Array } {
  if (!onnxInference()) return { open: opening(src, w, h, r), close: closing(src, w, h, r) };
  return openingAndClosingOnRuntime(src, w, h, r);
}

/**
 * Opening and closing of a plane over a (2r+1)-pixel square, on ONNX Runtime whether or not it was chosen.
 * @example
 * const { open, close } = openingAndClosingOnRuntime(smooth, w, h, 5);
 */
export function openingAndClosingOnRuntime(
  src: Float32Array,
  w: number,
  h: number,
  r: number,
): { open: Float32Array; close: Float32Array } {
  const session = keptRuntimeSession(sessions, r, "the damage detector's filters", () => morphologyToOnnx(r));
  const [open, close] = session.run({ plane: { data: src, dims: [1, 1, h, w] } }, ['opening', 'closing']);
  return { open: open!.data, close: close!.data };
}
