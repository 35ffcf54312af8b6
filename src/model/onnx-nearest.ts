/**
 * The colour memory's search as an ONNX graph: cosine similarity of each scan cell with every remembered
 * cell (one matrix product of unit-length rows) and the k most similar, so ONNX Runtime does on its own
 * threads the search TensorFlow.js does on WebAssembly. The same results to float32 rounding
 * (tests/colour-memory).
 */
import { encodeOnnxModel } from './onnx-file.js';

/**
 * The ONNX model that takes `query` [rows, dims] and gives `similarity` [rows, k], in descending order,
 * and `index` [rows, k], the remembered cells they belong to (as float: exact below 2^24 cells).
 * @example
 * const bytes = nearestToOnnx(memory.features, memory.a.length, memory.dims, 16);
 */
export function nearestToOnnx(remembered: Float32Array, count: number, dims: number, k: number): Uint8Array {
  return encodeOnnxModel({
    name: 'kinhue-memory-search',
    nodes: [
      { op: 'Gemm', inputs: ['query', 'remembered'], outputs: ['cosine'], attributes: { transB: { int: 1 } } },
      {
        op: 'TopK',
        inputs: ['cosine', 'k'],
        outputs: ['similarity', 'found'],
        attributes: { axis: { int: -1 }, largest: { int: 1 }, sorted: { int: 1 } },
      },
      { op: 'Cast', inputs: ['found'], outputs: ['index'], attributes: { to: { int: 1 } } },
    ],
    initializers: [
      { name: 'remembered', dims: [count, dims], type: 'float32', data: remembered },
      { name: 'k', dims: [1], type: 'int64', data: BigInt64Array.from([BigInt(k)]) },
    ],
    inputs: [{ name: 'query', shape: ['rows', dims] }],
    outputs: [
      { name: 'similarity', shape: ['rows', k] },
      { name: 'index', shape: ['rows', k] },
    ],
  });
}
