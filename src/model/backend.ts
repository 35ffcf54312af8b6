/**
 * Chooses the TensorFlow.js backend: the native one (tfjs-node) when it is installed and loads,
 * else WebAssembly (SIMD, one thread in Node), else the plain JavaScript one with a warning.
 */
import * as tf from '@tensorflow/tfjs';
import { registerWasmTrainingKernels } from './wasm-kernels.js';

export type BackendName = 'node' | 'wasm' | 'cpu';

export interface BackendInfo {
  /** The TensorFlow.js backend that runs: 'tensorflow' (tfjs-node), 'wasm' or 'cpu'. */
  name: string;
  /** Set when kinhue had to fall back to something slow. */
  warning?: string;
}

export interface BackendOptions {
  /** Try this one first; the others follow in the order node, wasm, cpu. */
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
  const order: BackendName[] = ['node', 'wasm', 'cpu'];
  if (prefer) order.sort((x, y) => (x === prefer ? -1 : y === prefer ? 1 : 0));
  for (const name of order) {
    if (name === 'node' && (await tryNode())) return { name: tf.getBackend() };
    if (name === 'wasm' && (await tryWasm())) return { name: tf.getBackend() };
    if (name === 'cpu') {
      await tf.setBackend('cpu');
      return prefer === 'cpu' ? { name: 'cpu' } : { name: 'cpu', warning: CPU_WARNING };
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
  const key = options.prefer ?? 'auto';
  if (current && current.key === key) return current.info;
  const info = choose(options.prefer);
  current = { key, info };
  return info;
}

/** The backend now running, as recorded in provenance records. */
export function backendName(): string {
  return tf.getBackend();
}
