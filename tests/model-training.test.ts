import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import * as tf from '@tensorflow/tfjs';
import { initBackend } from '../src/model/backend.js';
import { abBins } from '../src/model/bins.js';
import { createNetwork, encoderLayerNames, freezeEncoder } from '../src/model/network.js';
import { loadModel, saveModel } from '../src/model/storage.js';
import { createGradientComputer, createTrainer, type TrainerState } from '../src/model/train-step.js';

// Checks of the training step against its own contract (no outside reference exists for these):
// memory stays flat over 100 steps (issue 3), a save/load/continue run equals an uninterrupted one
// bit for bit, and a frozen encoder does not move. Tiny networks and crops keep this fast.

const bins = abBins();
const N = 2;
const H = 32;
const W = 32;

function batch(seed: number): { L: Float32Array; ab: Float32Array } {
  let s = seed >>> 0;
  const next = () => (s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 4294967296;
  const L = new Float32Array(N * H * W);
  const ab = new Float32Array(N * 2 * H * W);
  for (let i = 0; i < N; i++) {
    const hue = next() * 2 * Math.PI;
    for (let p = 0; p < H * W; p++) {
      const stripe = (p % W) % 4 < 2;
      L[i * H * W + p] = 30 + 40 * next() * 0.2 + (stripe ? 30 : 0);
      ab[i * 2 * H * W + p] = stripe ? 40 * Math.cos(hue) : -20;
      ab[i * 2 * H * W + H * W + p] = stripe ? 40 * Math.sin(hue) : 25;
    }
  }
  return { L, ab };
}

function weightsOf(net: tf.LayersModel): Float32Array[] {
  return net.getWeights().map((w) => Float32Array.from(w.dataSync() as Float32Array));
}

const classWeights = Float32Array.from({ length: bins.count }, (_, q) => 0.5 + (q % 7) / 6);
let dir: string;

beforeAll(async () => {
  await initBackend();
  dir = mkdtempSync(join(tmpdir(), 'kinhue-model-training-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('trainer', () => {
  it('lowers the loss and leaves tf.memory().numTensors flat over 100 steps', () => {
    const net = createNetwork({ width: 4, seed: 5 });
    const trainer = createTrainer(net, { learningRate: 3e-3, classWeights });
    const data = batch(1);
    const first = trainer.step(data.L, data.ab, N, H, W);
    const tensors = tf.memory().numTensors;
    const backend = tf.backend() as tf.KernelBackend & { numDataIds(): number };
    const buffers = backend.numDataIds();
    let last = first;
    for (let i = 0; i < 100; i++) last = trainer.step(data.L, data.ab, N, H, W);
    expect(tf.getBackend()).toBe('wasm');
    expect(tf.memory().numTensors).toBe(tensors);
    expect(backend.numDataIds()).toBe(buffers);
    expect(last).toBeLessThan(first * 0.7);
    expect(trainer.steps).toBe(101);
    trainer.dispose();
    net.dispose();
  });

  it('continues bit for bit after saving and loading the weights and the optimiser state', async () => {
    const net = createNetwork({ width: 4, seed: 9 });
    const trainer = createTrainer(net, { learningRate: 2e-3, classWeights });
    for (let i = 0; i < 5; i++) {
      const d = batch(100 + i);
      trainer.step(d.L, d.ab, N, H, W);
    }
    await saveModel(net, dir, { classWeights });
    const state: TrainerState = structuredClone(await trainer.getState());
    for (let i = 5; i < 10; i++) {
      const d = batch(100 + i);
      trainer.step(d.L, d.ab, N, H, W);
    }
    const straight = weightsOf(net);

    const loaded = await loadModel(dir);
    const resumed = createTrainer(loaded.network, { learningRate: 1, classWeights: loaded.classWeights });
    resumed.setState(state);
    expect(resumed.steps).toBe(5);
    expect(resumed.learningRate).toBe(2e-3);
    for (let i = 5; i < 10; i++) {
      const d = batch(100 + i);
      resumed.step(d.L, d.ab, N, H, W);
    }
    const again = weightsOf(loaded.network);
    expect(again.length).toBe(straight.length);
    for (let k = 0; k < straight.length; k++) {
      expect(Buffer.from(again[k].buffer).equals(Buffer.from(straight[k].buffer)), `weight ${k}`).toBe(true);
    }
    const s1 = await trainer.getState();
    const s2 = await resumed.getState();
    expect(s2.step).toBe(s1.step);
    for (let k = 0; k < s1.moments.length; k++) {
      expect(Buffer.from(s2.moments[k].m.buffer).equals(Buffer.from(s1.moments[k].m.buffer))).toBe(true);
      expect(Buffer.from(s2.moments[k].v.buffer).equals(Buffer.from(s1.moments[k].v.buffer))).toBe(true);
    }
    trainer.dispose();
    resumed.dispose();
    net.dispose();
    loaded.network.dispose();
  });

  it('a step from gradients computed apart (as worker threads do) equals a step, bit for bit', () => {
    // Two identical networks (same seed); one steps itself, the other gets its gradients from a separate computer.
    const a = createNetwork({ width: 4, seed: 6 });
    const b = createNetwork({ width: 4, seed: 6 });
    const ta = createTrainer(a, { learningRate: 2e-3, classWeights });
    const tb = createTrainer(b, { learningRate: 2e-3, classWeights });
    const gradients = createGradientComputer(b, { classWeights, names: tb.names });
    expect(tb.names).toEqual(b.trainableWeights.map((w) => w.originalName));
    for (let i = 0; i < 3; i++) {
      const d = batch(40 + i);
      const loss = ta.step(d.L, d.ab, N, H, W);
      const g = gradients.compute(d.L, d.ab, N, H, W);
      expect(g.loss).toBe(loss);
      tb.applyGradients(g.grads);
    }
    expect(tb.steps).toBe(3);
    const wa = weightsOf(a);
    weightsOf(b).forEach((w, k) => expect(Buffer.from(w.buffer).equals(Buffer.from(wa[k].buffer)), `weight ${k}`).toBe(true));
    tb.values().forEach((v, k) => expect(Array.from(v)).toEqual(Array.from(b.trainableWeights[k].read().dataSync())));
    expect(() => tb.applyGradients([])).toThrow(RangeError);
    for (const x of [ta, tb]) x.dispose();
    a.dispose();
    b.dispose();
  });

  it('refuses a state from a different network', async () => {
    const a = createNetwork({ width: 4 });
    const b = createNetwork({ width: 4 });
    freezeEncoder(b);
    const ta = createTrainer(a, { learningRate: 1e-3, classWeights });
    const tb = createTrainer(b, { learningRate: 1e-3, classWeights });
    const state = await ta.getState();
    expect(() => tb.setState(state)).toThrow(RangeError);
    for (const x of [ta, tb]) x.dispose();
    a.dispose();
    b.dispose();
  });

  it('keeps a frozen encoder fixed and trains the rest', () => {
    const net = createNetwork({ width: 4, seed: 2 });
    const names = encoderLayerNames(net);
    expect(names.length).toBeGreaterThan(4);
    expect(names.every((n) => n.startsWith('enc'))).toBe(true);
    freezeEncoder(net);
    const before = names.map((n) => Float32Array.from(net.getLayer(n).getWeights()[0].dataSync() as Float32Array));
    const head = Float32Array.from(net.getLayer('logits').getWeights()[0].dataSync() as Float32Array);
    const trainer = createTrainer(net, { learningRate: 1e-2, classWeights });
    const d = batch(3);
    for (let i = 0; i < 3; i++) trainer.step(d.L, d.ab, N, H, W);
    names.forEach((n, i) => expect(Array.from(net.getLayer(n).getWeights()[0].dataSync())).toEqual(Array.from(before[i])));
    expect(Array.from(net.getLayer('logits').getWeights()[0].dataSync())).not.toEqual(Array.from(head));
    trainer.dispose();
    net.dispose();
  });

  it('rejects crops that are not multiples of 16 and mismatched planes', () => {
    const net = createNetwork({ width: 4 });
    const trainer = createTrainer(net, { learningRate: 1e-3, classWeights });
    expect(() => trainer.step(new Float32Array(20 * 20), new Float32Array(2 * 20 * 20), 1, 20, 20)).toThrow(RangeError);
    expect(() => trainer.step(new Float32Array(32 * 32), new Float32Array(32 * 32), 1, 32, 32)).toThrow(RangeError);
    expect(() => createTrainer(net, { learningRate: 1e-3, classWeights: new Float32Array(3) })).toThrow(RangeError);
    trainer.dispose();
    net.dispose();
  });
});
