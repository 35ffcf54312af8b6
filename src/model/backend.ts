/**
 * Chooses the backends: TensorFlow.js's native one (tfjs-node) when it is installed and loads, for
 * everything; else ONNX Runtime (onnxruntime-node, every core) for the network and the backbone, with
 * TensorFlow.js on WebAssembly for training and the rest; else WebAssembly alone (SIMD, one thread in
 * Node); else the plain JavaScript backend with a warning. KINHUE_BACKEND names one to try first.
 */
import * as tf from '@tensorflow/tfjs';
import { UsageError } from '../errors.js';
import { setOnnxInference } from './native-inference.js';
import { onnxRuntimeVersion } from './onnx-runtime.js';
import { registerWasmTrainingKernels } from './wasm-kernels.js';

export type BackendName = 'node' | 'onnxruntime' | 'wasm' | 'cpu';

const BACKEND_NAMES: readonly BackendName[] = ['node', 'onnxruntime', 'wasm', 'cpu'];

/** The environment variable naming the backend to try first. */
export const BACKEND_ENV = 'KINHUE_BACKEND';

export interface BackendInfo {
  /** The TensorFlow.js backend that runs: 'tensorflow' (tfjs-node), 'wasm' or 'cpu'. */
  name: string;
  /**
   * What runs the model (network and backbone), as provenance records name it: 'onnxruntime', or the
   * TensorFlow.js backend's name.
   */
  model: string;
  /** Set when kinhue had to fall back to something slow. */
  warning?: string;
}

export interface BackendOptions {
  /** Try this one first (default: KINHUE_BACKEND's); the others follow in the order node, onnxruntime, wasm, cpu. */
  prefer?: BackendName;
}

const CPU_WARNING =
  'running on the plain JavaScript backend, about 35 times slower than WebAssembly; ' +
  'reinstall kinhue so that @tensorflow/tfjs-backend-wasm is present';

let current: { key: string; info: Promise<BackendInfo> } | null = null;

async function tryNode(): Promise<boolean> {
  // A variable specifier keeps TypeScript and bundlers from requiring the optional package.
  const specifier = '@tensorflow/tfjs-node';
  try {
    await import(specifier);
  } catch {
    return false;
  }
  // tfjs-node registers 'tensorflow' on the tfjs-core it finds; use it only if that is ours.
  if (!tf.findBackendFactory('tensorflow')) return false;
  try {
    return await tf.setBackend('tensorflow');
  } catch {
    return false;
  }
}

async function tryWasm(): Promise<boolean> {
  try {
    // In Node the backend finds its .wasm files beside its own script (node_modules), so
    // setWasmPaths is only needed when kinhue is bundled; threads need workers Node lacks here.
    await import('@tensorflow/tfjs-backend-wasm');
    tf.env().set('WASM_HAS_MULTITHREAD_SUPPORT', false);
    registerWasmTrainingKernels();
    return await tf.setBackend('wasm');
  } catch {
    return false;
  }
}

async function choose(prefer: BackendName | undefined): Promise<BackendInfo> {
  // TensorFlow.js prints its own notices (e.g. on starting the cpu backend in Node); only the CLI
  // prints in kinhue, and it reports the fallback from `warning`.
  tf.env().set('PROD', true);
  setOnnxInference(false);
  const order = [...BACKEND_NAMES];
  if (prefer) order.sort((x, y) => (x === prefer ? -1 : y === prefer ? 1 : 0));
  for (const name of order) {
    if (name === 'node' && (await tryNode())) return { name: tf.getBackend(), model: tf.getBackend() };
    if (name === 'onnxruntime' && onnxRuntimeVersion()) {
      // TensorFlow.js still trains, decodes and runs what is not the network: on WebAssembly where it starts.
      if (!(await tryWasm())) await tf.setBackend('cpu');
      setOnnxInference(true);
      return { name: tf.getBackend(), model: 'onnxruntime' };
    }
    if (name === 'wasm' && (await tryWasm())) return { name: tf.getBackend(), model: tf.getBackend() };
    if (name === 'cpu') {
      await tf.setBackend('cpu');
      return prefer === 'cpu' ? { name: 'cpu', model: 'cpu' } : { name: 'cpu', model: 'cpu', warning: CPU_WARNING };
    }
  }
  /* c8 ignore next */
  throw new Error('no TensorFlow.js backend could be started');
}

/**
 * Starts the fastest available backend once; later calls with the same preference return the
 * same answer. A different preference switches backend.
 * @example
 * const { name, warning } = await initBackend();
 * if (warning) console.error(warning);
 */
export function initBackend(options: BackendOptions = {}): Promise<BackendInfo> {
  const prefer = options.prefer ?? preferredByEnvironment();
  const key = prefer ?? 'auto';
  if (current && current.key === key) return current.info;
  const info = choose(prefer);
  current = { key, info };
  return info;
}

/** KINHUE_BACKEND's backend, if set; a name kinhue does not know is a usage error. */
function preferredByEnvironment(): BackendName | undefined {
  const value = process.env[BACKEND_ENV];
  if (value === undefined || value === '') return undefined;
  if (!(BACKEND_NAMES as readonly string[]).includes(value)) {
    throw new UsageError(
      `${BACKEND_ENV}=${value.slice(0, 40)} names no backend kinhue knows`,
      `set it to one of ${BACKEND_NAMES.join(', ')}, or unset it`,
    );
  }
  return value as BackendName;
}

/** The TensorFlow.js backend now running. */
export function backendName(): string {
  return tf.getBackend();
}
