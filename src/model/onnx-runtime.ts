/**
 * ONNX Runtime on the CPU, from the optional npm package onnxruntime-node (its native libraries ship inside
 * the package; .npmrc keeps its install step from fetching GPU libraries). The package's public `run()`
 * only defers the binding's synchronous call to the next turn of the event loop; kinhue's predict() is
 * synchronous, so sessions here call the binding directly. That binding is not public API: package.json
 * pins the version, and tests/model-onnx checks that it still loads and runs.
 */
import { createRequire } from 'node:module';
import { availableParallelism } from 'node:os';
import { encodeOnnxModel } from './onnx-file.js';

interface OrtTensor {
  data: Float32Array;
  dims: readonly number[];
}

interface BindingSession {
  loadModel(buffer: ArrayBuffer, byteOffset: number, byteLength: number, options: object): void;
  run(feeds: Record<string, OrtTensor>, fetches: Record<string, null>, options: object): Record<string, OrtTensor>;
  dispose(): void;
}

interface Runtime {
  Session: new () => BindingSession;
  Tensor: new (type: 'float32', data: Float32Array, dims: readonly number[]) => OrtTensor;
  version: string;
}

let runtime: Runtime | null | undefined;

/** Threads for one operation of a new session: every core, unless a restore worker shares them (setOnnxThreads). */
let sessionThreads = availableParallelism();

/**
 * Sets the threads new sessions use for one operation. Restore's workers each take their share of the
 * cores: with more threads than cores in all, they wait on each other and spend more CPU time per scan.
 * @example
 * setOnnxThreads(Math.max(1, Math.floor(availableParallelism() / jobs)));
 */
export function setOnnxThreads(threads: number): void {
  sessionThreads = Math.max(1, Math.floor(threads));
}

/** The package's binding, or null when it is absent or does not load on this machine. */
function loadRuntime(): Runtime | null {
  if (runtime !== undefined) return runtime;
  try {
    const require = createRequire(import.meta.url);
    const { binding, initOrt } = require('onnxruntime-node/dist/binding.js') as {
      binding: { InferenceSession: new () => BindingSession };
      initOrt: () => void;
    };
    const { Tensor, env } = require('onnxruntime-node') as { Tensor: Runtime['Tensor']; env: { versions: Record<string, string> } };
    initOrt();
    runtime = { Session: binding.InferenceSession, Tensor, version: env.versions.node ?? '' };
  } catch {
    runtime = null;
  }
  return runtime;
}

/** A tensor out of a session: float32 values and their dimensions. */
export interface RuntimeOutput {
  data: Float32Array;
  dims: number[];
}

/** One loaded ONNX model, run synchronously on the CPU. */
export class OnnxSession {
  private readonly session: BindingSession;
  private readonly runtime: Runtime;

  /**
   * @param bytes an ONNX model file's bytes
   * @param threads threads for one operation; default all cores or setOnnxThreads' number (a busy-waiting
   *   pool would steal the cores from restore's other workers, so idle threads sleep)
   */
  constructor(bytes: Uint8Array, threads = sessionThreads) {
    const ort = loadRuntime();
    if (!ort) throw new Error('onnxruntime-node is not installed or does not load on this machine');
    this.runtime = ort;
    this.session = new ort.Session();
    this.session.loadModel(bytes.buffer as ArrayBuffer, bytes.byteOffset, bytes.byteLength, {
      executionProviders: ['cpu'],
      graphOptimizationLevel: 'all',
      intraOpNumThreads: threads,
      interOpNumThreads: 1,
      executionMode: 'sequential',
      extra: { session: { intra_op: { allow_spinning: '0' } } },
    });
  }

  /**
   * Runs the model on named float32 inputs; returns the named outputs in the order asked.
   * @example
   * const [y] = session.run({ x: { data, dims: [1, 3, 8, 8] } }, ['y']);
   */
  run(inputs: Record<string, { data: Float32Array; dims: readonly number[] }>, outputs: readonly string[]): RuntimeOutput[] {
    const feeds: Record<string, OrtTensor> = {};
    for (const [name, t] of Object.entries(inputs)) feeds[name] = new this.runtime.Tensor('float32', t.data, t.dims);
    const fetches = Object.fromEntries(outputs.map((name) => [name, null]));
    const result = this.session.run(feeds, fetches, {});
    return outputs.map((name) => ({ data: result[name]!.data, dims: Array.from(result[name]!.dims) }));
  }

  dispose(): void {
    this.session.dispose();
  }
}

/**
 * Whether ONNX Runtime loads and runs here: one tiny model (a ReLU) through the same path predict takes.
 * Returns its version, or undefined.
 * @example
 * if (onnxRuntimeVersion()) console.log('native inference available');
 */
export function onnxRuntimeVersion(): string | undefined {
  const ort = loadRuntime();
  if (!ort) return undefined;
  try {
    const probe = new OnnxSession(
      encodeOnnxModel({
        name: 'probe',
        nodes: [{ op: 'Relu', inputs: ['x'], outputs: ['y'] }],
        initializers: [],
        inputs: [{ name: 'x', shape: [2] }],
        outputs: [{ name: 'y', shape: [2] }],
      }),
      1,
    );
    const [y] = probe.run({ x: { data: Float32Array.from([-1, 2]), dims: [2] } }, ['y']);
    probe.dispose();
    return y!.data[0] === 0 && y!.data[1] === 2 ? ort.version : undefined;
  } catch {
    return undefined;
  }
}
