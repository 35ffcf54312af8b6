import { describe, expect, it } from 'vitest';
import * as tf from '@tensorflow/tfjs';
import { backendName, initBackend } from '../src/model/backend.js';

// The backend order of issue 3: tfjs-node when it loads (it cannot install on this project's
// machines, so it is absent here), else WebAssembly, else the plain JavaScript backend.

describe('initBackend', () => {
  it('picks WebAssembly when tfjs-node is absent, once, with the training kernels registered', async () => {
    const first = initBackend();
    expect(initBackend()).toBe(first);
    const info = await first;
    expect(info).toEqual({ name: 'wasm' });
    expect(backendName()).toBe('wasm');
    expect(tf.getKernel('Conv2DBackpropFilter', 'wasm')).toBeDefined();
    expect(tf.env().getBool('WASM_HAS_MULTITHREAD_SUPPORT')).toBe(false);
  });

  it('switches to the plain JavaScript backend when asked, and back', async () => {
    expect(await initBackend({ prefer: 'cpu' })).toEqual({ name: 'cpu' });
    expect(tf.getBackend()).toBe('cpu');
    expect(await initBackend({ prefer: 'wasm' })).toEqual({ name: 'wasm' });
    expect(tf.getBackend()).toBe('wasm');
  });
});
