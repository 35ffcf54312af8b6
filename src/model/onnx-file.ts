/**
 * The ONNX file format, written by hand: a ModelProto in protocol-buffer encoding, with only the messages and
 * fields kinhue's exports use (field numbers from onnx/onnx.proto, IR version 8, the default opset 18).
 * Small enough that a dependency would weigh more than the code.
 */

/** Element types kinhue writes (onnx.proto's TensorProto.DataType). */
const DATA_TYPES = { float32: 1, int64: 7 } as const;
export type OnnxDataType = keyof typeof DATA_TYPES;

/** A constant tensor (an initializer). */
export interface OnnxTensor {
  name: string;
  dims: number[];
  type: OnnxDataType;
  data: Float32Array | BigInt64Array;
}

/** An attribute value, tagged so that 1 (an int) and 1.0 (a float) stay apart. */
export type OnnxAttribute = { int: number } | { float: number } | { string: string } | { ints: number[] };

export interface OnnxNode {
  op: string;
  inputs: string[];
  outputs: string[];
  name?: string;
  attributes?: Record<string, OnnxAttribute>;
}

/** A graph input or output: a float32 tensor whose dimensions are sizes or symbolic names (no shape: any). */
export interface OnnxValue {
  name: string;
  shape?: (number | string)[];
}

export interface OnnxGraph {
  name: string;
  nodes: OnnxNode[];
  initializers: OnnxTensor[];
  inputs: OnnxValue[];
  outputs: OnnxValue[];
}

/** IR version 8 goes with opsets up to 18. */
const IR_VERSION = 8;
export const OPSET = 18;

/** Protocol-buffer wire types. */
const VARINT = 0;
const FIXED32 = 5;
const BYTES = 2;

/** Appends protocol-buffer fields to a growing list of chunks. */
class Message {
  private readonly chunks: Uint8Array[] = [];

  varint(field: number, value: number | bigint): this {
    this.key(field, VARINT);
    this.push(varint(BigInt(value)));
    return this;
  }

  float(field: number, value: number): this {
    this.key(field, FIXED32);
    const bytes = new Uint8Array(4);
    new DataView(bytes.buffer).setFloat32(0, value, true);
    this.push(bytes);
    return this;
  }

  bytes(field: number, value: Uint8Array): this {
    this.key(field, BYTES);
    this.push(varint(BigInt(value.length)));
    this.push(value);
    return this;
  }

  string(field: number, value: string): this {
    return this.bytes(field, new TextEncoder().encode(value));
  }

  message(field: number, value: Message): this {
    return this.bytes(field, value.finish());
  }

  finish(): Uint8Array {
    const out = new Uint8Array(this.chunks.reduce((n, c) => n + c.length, 0));
    let at = 0;
    for (const c of this.chunks) {
      out.set(c, at);
      at += c.length;
    }
    return out;
  }

  private key(field: number, wire: number): void {
    this.push(varint(BigInt((field << 3) | wire)));
  }

  private push(chunk: Uint8Array): void {
    this.chunks.push(chunk);
  }
}

/** Base-128 varint; a negative value as its 64-bit two's complement (ten bytes), as protocol buffers want. */
function varint(value: bigint): Uint8Array {
  let v = BigInt.asUintN(64, value);
  const out: number[] = [];
  do {
    let byte = Number(v & 0x7fn);
    v >>= 7n;
    if (v !== 0n) byte |= 0x80;
    out.push(byte);
  } while (v !== 0n);
  return Uint8Array.from(out);
}

function tensorMessage(t: OnnxTensor): Message {
  const m = new Message();
  for (const d of t.dims) m.varint(1, d);
  m.varint(2, DATA_TYPES[t.type]);
  m.string(8, t.name);
  // raw_data is little-endian, as typed arrays are on every platform Node runs on that kinhue supports.
  m.bytes(9, new Uint8Array(t.data.buffer, t.data.byteOffset, t.data.byteLength));
  return m;
}

function attributeMessage(name: string, value: OnnxAttribute): Message {
  const m = new Message().string(1, name);
  // AttributeProto.type: FLOAT 1, INT 2, STRING 3, INTS 7.
  if ('int' in value) return m.varint(3, value.int).varint(20, 2);
  if ('float' in value) return m.float(2, value.float).varint(20, 1);
  if ('string' in value) return m.string(4, value.string).varint(20, 3);
  for (const i of value.ints) m.varint(8, i);
  return m.varint(20, 7);
}

function nodeMessage(node: OnnxNode): Message {
  const m = new Message();
  for (const i of node.inputs) m.string(1, i);
  for (const o of node.outputs) m.string(2, o);
  if (node.name) m.string(3, node.name);
  m.string(4, node.op);
  for (const [name, value] of Object.entries(node.attributes ?? {})) m.message(5, attributeMessage(name, value));
  return m;
}

function valueMessage(value: OnnxValue): Message {
  const tensorType = new Message().varint(1, DATA_TYPES.float32);
  if (value.shape) {
    const shape = new Message();
    for (const d of value.shape) shape.message(1, typeof d === 'number' ? new Message().varint(1, d) : new Message().string(2, d));
    tensorType.message(2, shape);
  }
  return new Message().string(1, value.name).message(2, new Message().message(1, tensorType));
}

/**
 * The bytes of an ONNX model file holding one graph.
 * @example
 * const bytes = encodeOnnxModel({ name: 'g', nodes: [{ op: 'Relu', inputs: ['x'], outputs: ['y'] }],
 *   initializers: [], inputs: [{ name: 'x', shape: [1] }], outputs: [{ name: 'y', shape: [1] }] });
 */
export function encodeOnnxModel(graph: OnnxGraph, producerVersion = ''): Uint8Array {
  const g = new Message();
  for (const node of graph.nodes) g.message(1, nodeMessage(node));
  g.string(2, graph.name);
  for (const t of graph.initializers) g.message(5, tensorMessage(t));
  for (const v of graph.inputs) g.message(11, valueMessage(v));
  for (const v of graph.outputs) g.message(12, valueMessage(v));
  return new Message()
    .varint(1, IR_VERSION)
    .string(2, 'kinhue')
    .string(3, producerVersion)
    .message(7, g)
    .message(8, new Message().string(1, '').varint(2, OPSET))
    .finish();
}
