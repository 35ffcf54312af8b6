import { describe, expect, it, beforeAll } from 'vitest';
import * as tf from '@tensorflow/tfjs';
import { initBackend } from '../src/model/backend.js';

// Reference: the `cpu` backend's Conv2DBackpropFilter / Conv2DBackpropInput kernels shipped with
// TensorFlow.js 4.22 (plain loops over the definition). Tolerance: 1e-3 of the largest reference
// magnitude, float32 sums in a different order (common practice).

function rng(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return s / 4294967296 - 0.5;
  };
}

function randomArray(n: number, next: () => number): Float32Array {
  const out = new Float32Array(n);
  for (let i = 0; i < n; i++) out[i] = next();
  return out;
}

interface Case {
  x: [number, number, number, number];
  k: [number, number];
  co: number;
  stride: 1 | 2;
  pad: 'same' | 'valid';
}

const cases: Case[] = [
  { x: [2, 9, 7, 3], k: [3, 3], co: 5, stride: 1, pad: 'same' },
  { x: [1, 11, 13, 4], k: [3, 3], co: 2, stride: 1, pad: 'valid' },
  { x: [2, 9, 7, 3], k: [3, 3], co: 5, stride: 2, pad: 'same' },
  { x: [3, 13, 11, 2], k: [3, 3], co: 6, stride: 2, pad: 'valid' },
  { x: [1, 10, 12, 5], k: [1, 1], co: 7, stride: 1, pad: 'same' },
  { x: [2, 8, 9, 3], k: [5, 3], co: 4, stride: 1, pad: 'same' },
  { x: [2, 15, 10, 1], k: [4, 4], co: 3, stride: 2, pad: 'same' },
  { x: [1, 7, 7, 6], k: [2, 2], co: 3, stride: 1, pad: 'valid' },
  { x: [2, 11, 9, 3], k: [1, 1], co: 4, stride: 2, pad: 'valid' },
  { x: [2, 14, 12, 3], k: [3, 3], co: 4, stride: 2, pad: 'valid' },
];

function gradients(c: Case, seed: number): { dx: Float32Array; dw: Float32Array } {
  const next = rng(seed);
  const xs = randomArray(
    c.x.reduce((p, q) => p * q, 1),
    next,
  );
  const wShape: [number, number, number, number] = [c.k[0], c.k[1], c.x[3], c.co];
  const ws = randomArray(
    wShape.reduce((p, q) => p * q, 1),
    next,
  );
  return tf.tidy(() => {
    const x = tf.tensor4d(xs, c.x);
    const w = tf.tensor4d(ws, wShape);
    const out = tf.conv2d(x, w, c.stride, c.pad);
    const r = tf.tensor(randomArray(out.size, next), out.shape);
    const [dx, dw] = tf.grads((a: tf.Tensor, b: tf.Tensor) =>
      tf.sum(tf.mul(tf.conv2d(a as tf.Tensor4D, b as tf.Tensor4D, c.stride, c.pad), r)),
    )([x, w]);
    return { dx: dx.dataSync() as Float32Array, dw: dw.dataSync() as Float32Array };
  });
}

function relativeError(got: Float32Array, want: Float32Array): number {
  let maxRef = 0;
  let maxDiff = 0;
  for (let i = 0; i < want.length; i++) {
    maxRef = Math.max(maxRef, Math.abs(want[i]));
    maxDiff = Math.max(maxDiff, Math.abs(got[i] - want[i]));
  }
  return maxDiff / maxRef;
}

describe('wasm training kernels', () => {
  beforeAll(async () => {
    const info = await initBackend({ prefer: 'wasm' });
    expect(info.name).toBe('wasm');
  });

  it.each(cases.map((c, i) => [i, c] as const))('case %i: gradients equal the cpu backend within 1e-3', async (i, c) => {
    await tf.setBackend('cpu');
    const want = gradients(c, 100 + i);
    await tf.setBackend('wasm');
    const got = gradients(c, 100 + i);
    expect(got.dw.length).toBe(want.dw.length);
    expect(got.dx.length).toBe(want.dx.length);
    expect(relativeError(got.dw, want.dw)).toBeLessThan(1e-3);
    expect(relativeError(got.dx, want.dx)).toBeLessThan(1e-3);
  });

  it('leaves no backend data behind', async () => {
    await tf.setBackend('wasm');
    const c = cases[3];
    gradients(c, 7);
    const before = tf.memory().numTensors;
    const backend = tf.backend() as tf.KernelBackend & { numDataIds(): number };
    const idsBefore = backend.numDataIds();
    for (let i = 0; i < 5; i++) gradients(c, 7 + i);
    expect(tf.memory().numTensors).toBe(before);
    expect(backend.numDataIds()).toBe(idsBefore);
  });
});
