import { afterEach, describe, expect, it } from 'vitest';
import * as tf from '@tensorflow/tfjs';
import { UsageError } from '../src/errors.js';
import { BACKEND_ENV, backendName, initBackend } from '../src/model/backend.js';
import { onnxInference } from '../src/model/native-inference.js';

// The backend order of issues 3 and 13: tfjs-node when it loads (it cannot install on this project's
// machines, so it is absent here), else ONNX Runtime for the model (onnxruntime-node, an optional
// dependency installed here) beside TensorFlow.js on WebAssembly, else WebAssembly alone, else the plain
// JavaScript backend.

describe('initBackend', () => {
  afterEach(() => {
    delete process.env[BACKEND_ENV];
  });

  it('runs the model on ONNX Runtime when tfjs-node is absent, TensorFlow.js on WebAssembly with the training kernels, once', async () => {
    const first = initBackend();
    expect(initBackend()).toBe(first);
    const info = await first;
    expect(info).toEqual({ name: 'wasm', model: 'onnxruntime' });
    expect(onnxInference()).toBe(true);
    expect(backendName()).toBe('wasm');
    expect(tf.getKernel('Conv2DBackpropFilter', 'wasm')).toBeDefined();
    expect(tf.env().getBool('WASM_HAS_MULTITHREAD_SUPPORT')).toBe(false);
  });

  it('switches to WebAssembly alone, or the plain JavaScript backend, when asked, and back', async () => {
    expect(await initBackend({ prefer: 'wasm' })).toEqual({ name: 'wasm', model: 'wasm' });
    expect(onnxInference()).toBe(false);
    expect(await initBackend({ prefer: 'cpu' })).toEqual({ name: 'cpu', model: 'cpu' });
    expect(tf.getBackend()).toBe('cpu');
    expect(await initBackend({ prefer: 'onnxruntime' })).toEqual({ name: 'wasm', model: 'onnxruntime' });
    expect(tf.getBackend()).toBe('wasm');
  });

  it('takes the first choice from KINHUE_BACKEND, and refuses a name it does not know', async () => {
    process.env[BACKEND_ENV] = 'wasm';
    expect(await initBackend()).toEqual({ name: 'wasm', model: 'wasm' });
    process.env[BACKEND_ENV] = 'gpu';
    expect(() => initBackend()).toThrow(UsageError);
    expect(() => initBackend()).toThrow(/KINHUE_BACKEND=gpu names no backend/);
  });
});
