import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import * as tf from '@tensorflow/tfjs';
import { shrinkPlane, srgbToLab } from '../src/colour/index.js';
import { ModelError } from '../src/errors.js';
import { decodeImage } from '../src/image/index.js';
import { backboneFeatures, BACKBONE_CHANNELS, type BackboneFeatures } from '../src/model/backbone.js';
import { initBackend } from '../src/model/backend.js';
import { createNetwork } from '../src/model/network.js';
import { annealedMeanTensor, decodingTable, leastCiede2000 } from '../src/model/decoding.js';
import { runDecoding, runNetwork } from '../src/model/native-inference.js';
import { graphModelToOnnx, type GraphModelJson } from '../src/model/onnx-graph.js';
import { networkToOnnx } from '../src/model/onnx-network.js';
import { onnxRuntimeVersion } from '../src/model/onnx-runtime.js';
import { predict, type Prediction } from '../src/model/predict.js';
import { loadRepairModel, networkPlanes } from '../src/repair/index.js';
import type { KinhueModel } from '../src/model/storage.js';
import { loadShippedModel } from './helpers/shipped-model.js';

// ONNX Runtime against TensorFlow.js on the same network, the same weights and the same input. Both
// compute in float32 but sum in different orders, so values differ by about 1e-6 of their size (common
// practice for float32 across libraries). Tolerances of our own, well above that and far below any visible
// colour difference: a*b* by the annealed mean within 0.01; by least-ciede2000, which picks one of a finite
// set of candidate colours, a near-tie may pick another candidate, so at most 0.1% of pixels may differ by
// more than 0.01 and the mean difference stays under 0.05; confidence within 1e-4.

const WIDTH = 512;
const HEIGHT = 288;

async function photoLightness(): Promise<Float32Array> {
  const { pixels } = await decodeImage('demo-photos/originals/wrenfold-04-hill-pony.jpg');
  const { L } = srgbToLab(pixels.data, pixels.channels);
  return shrinkPlane(L, pixels.width, pixels.height, WIDTH, HEIGHT);
}

/** Runs `run` once with ONNX Runtime for the model and once with TensorFlow.js (WebAssembly) alone. */
async function both<T>(run: () => T): Promise<{ native: T; tfjs: T }> {
  expect((await initBackend({ prefer: 'onnxruntime' })).model).toBe('onnxruntime');
  const native = run();
  expect((await initBackend({ prefer: 'wasm' })).model).toBe('wasm');
  return { native, tfjs: run() };
}

function expectSamePrediction(native: Prediction, tfjs: Prediction, discrete: boolean): void {
  expect([native.width, native.height]).toEqual([tfjs.width, tfjs.height]);
  let apart = 0;
  let sum = 0;
  let max = 0;
  for (let i = 0; i < tfjs.a.length; i++) {
    const d = Math.hypot(native.a[i]! - tfjs.a[i]!, native.b[i]! - tfjs.b[i]!);
    sum += d;
    max = Math.max(max, d);
    if (d > 0.01) apart++;
    expect(Math.abs(native.confidence[i]! - tfjs.confidence[i]!)).toBeLessThan(1e-4);
  }
  if (discrete) {
    expect(apart / tfjs.a.length).toBeLessThanOrEqual(0.001);
    expect(sum / tfjs.a.length).toBeLessThan(0.05);
  } else expect(max).toBeLessThan(0.01);
}

function maxDifference(x: ArrayLike<number>, y: ArrayLike<number>): number {
  expect(x.length).toBe(y.length);
  let m = 0;
  for (let i = 0; i < x.length; i++) m = Math.max(m, Math.abs(x[i]! - y[i]!));
  return m;
}

/** Backbone features of the right sizes, drawn from a seeded generator (an untrained network needs no real ones). */
function syntheticFeatures(seed: number): BackboneFeatures {
  let s = seed;
  const next = () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 4294967296) * 2 - 1;
  return {
    local8: Float32Array.from({ length: 52 * 52 * BACKBONE_CHANNELS.local8 }, next),
    local16: Float32Array.from({ length: 26 * 26 * BACKBONE_CHANNELS.local16 }, next),
    global: Float32Array.from({ length: BACKBONE_CHANNELS.global }, next),
  };
}

describe('ONNX Runtime', () => {
  it('loads from the installed onnxruntime-node and runs a model through its synchronous binding', () => {
    expect(onnxRuntimeVersion()).toMatch(/^\d+\.\d+\.\d+/);
  });
});

describe('the shipped model on ONNX Runtime', () => {
  let model: KinhueModel;
  let L: Float32Array;
  beforeAll(async () => {
    model = await loadShippedModel();
    L = await photoLightness();
  });
  afterAll(() => model?.network.dispose());

  it('gives the backbone features TensorFlow.js gives, within 1e-4', async () => {
    const { native, tfjs } = await both(() => backboneFeatures(model.backbone!, L, WIDTH, HEIGHT));
    for (const key of ['local8', 'local16', 'global'] as const) expect(maxDifference(native[key], tfjs[key])).toBeLessThan(1e-4);
  });

  it('predicts the a*b* and confidence TensorFlow.js predicts, by either decoding', async () => {
    const features = backboneFeatures(model.backbone!, L, WIDTH, HEIGHT);
    const least = await both(() => predict(model, L, WIDTH, HEIGHT, { features }));
    expectSamePrediction(least.native, least.tfjs, true);
    const annealed = await both(() => predict(model, L, WIDTH, HEIGHT, { features, decoding: 'annealed-mean' }));
    expectSamePrediction(annealed.native, annealed.tfjs, false);
  });
});

describe('the export follows the network definition', () => {
  afterAll(async () => {
    await initBackend();
  });

  it('an untrained small network predicts the same on both', async () => {
    const network = createNetwork({ width: 4, seed: 3 });
    const L = await photoLightness();
    const { native, tfjs } = await both(() => predict(network, L, WIDTH, HEIGHT, { decoding: 'annealed-mean' }));
    expectSamePrediction(native, tfjs, false);
    network.dispose();
  });

  it('a network of another width that reads backbone features predicts the same on both', async () => {
    const network = createNetwork({ width: 8, seed: 11, backbone: true });
    const L = await photoLightness();
    const features = syntheticFeatures(5);
    const { native, tfjs } = await both(() => predict(network, L, WIDTH, HEIGHT, { features }));
    expectSamePrediction(native, tfjs, true);
    network.dispose();
  });

  it('the shipped repair network gives the damage probability and the undamaged L* TensorFlow.js gives', async () => {
    const model = await loadRepairModel('models/kinhue-repair');
    const L = await photoLightness();
    // Every other 32-pixel block, so the runtime sees the batched tiles restore gives it.
    const blocks = Array.from({ length: Math.ceil(WIDTH / 32) * Math.ceil(HEIGHT / 32) }, (_, i) => i).filter((i) => i % 2 === 0);
    const { native, tfjs } = await both(() => networkPlanes(L, WIDTH, HEIGHT, model, blocks));
    expect(maxDifference(native.probability, tfjs.probability)).toBeLessThan(1e-4);
    expect(maxDifference(native.lightness, tfjs.lightness)).toBeLessThan(0.01);
    model.network.dispose();
  });

  it('a network built otherwise (5 x 5 and strided valid convolutions, a linear layer, upsampling by 3) gives the same logits', async () => {
    const input = tf.input({ shape: [null, null, 1], name: 'lightness' });
    let x = tf.layers
      .conv2d({ filters: 6, kernelSize: 5, padding: 'same', activation: 'relu', name: 'wide' })
      .apply(input) as tf.SymbolicTensor;
    const side = tf.layers
      .conv2d({ filters: 3, kernelSize: 3, strides: 2, padding: 'valid', name: 'strided', useBias: false })
      .apply(x) as tf.SymbolicTensor;
    x = tf.layers.upSampling2d({ size: [3, 3], name: 'up3' }).apply(side) as tf.SymbolicTensor;
    x = tf.layers
      .concatenate({ name: 'join' })
      .apply([x, tf.layers.conv2d({ filters: 2, kernelSize: 1, name: 'one' }).apply(x) as tf.SymbolicTensor]) as tf.SymbolicTensor;
    const network = tf.model({ inputs: input, outputs: x });
    const data = Float32Array.from({ length: 33 * 21 }, (_, i) => Math.sin(i / 7));
    const { native, tfjs } = await both(() =>
      tf.tidy(() => {
        const out = runNetwork(network, tf.tensor4d(data, [1, 21, 33, 1]));
        return { shape: out.shape, data: out.dataSync() as Float32Array };
      }),
    );
    expect(native.shape).toEqual(tfjs.shape);
    expect(maxDifference(native.data, tfjs.data)).toBeLessThan(1e-4);
    network.dispose();
  });

  it('new weights are run, not the ones of the first export', async () => {
    const network = createNetwork({ width: 4, seed: 3 });
    const L = await photoLightness();
    await initBackend({ prefer: 'onnxruntime' });
    const before = predict(network, L, WIDTH, HEIGHT, { decoding: 'annealed-mean' });
    const other = createNetwork({ width: 4, seed: 99 });
    network.setWeights(other.getWeights());
    const { native, tfjs } = await both(() => predict(network, L, WIDTH, HEIGHT, { decoding: 'annealed-mean' }));
    expectSamePrediction(native, tfjs, false);
    expect(maxDifference(native.a, before.a)).toBeGreaterThan(0.01);
    network.dispose();
    other.dispose();
  });

  it('a layer the export does not know stops it with the layer named', async () => {
    const input = tf.input({ shape: [null, null, 1], name: 'lightness' });
    const output = tf.layers.batchNormalization({ name: 'norm' }).apply(input) as tf.SymbolicTensor;
    const network = tf.model({ inputs: input, outputs: output });
    expect(() => networkToOnnx(network)).toThrow(/layer norm is a BatchNormalization/);
    await initBackend({ prefer: 'onnxruntime' });
    expect(() => tf.tidy(() => runNetwork(network, tf.zeros([1, 16, 16, 1])))).toThrow(ModelError);
    network.dispose();
  });

  it('the graph export reads the graph JSON: an operation it does not know is named', () => {
    const graph = (op: string): GraphModelJson => ({
      modelTopology: {
        node: [
          { name: 'x', op: 'Placeholder' },
          { name: 'y', op, input: ['x'] },
        ],
      },
      weightsManifest: [{ weights: [] }],
    });
    expect(graphModelToOnnx(graph('Sigmoid'), new Uint8Array(0), ['y']).length).toBeGreaterThan(0);
    expect(() => graphModelToOnnx(graph('Softplus'), new Uint8Array(0), ['y'])).toThrow(/node y is a Softplus/);
  });
});

describe('the decoding on ONNX Runtime', () => {
  // Random logits over the shipped bins, with the shipped model's class weights: the graph against
  // decoding.ts on TensorFlow.js (WebAssembly), fed logits and fed probabilities (as after region pooling).
  it('chooses the colour TensorFlow.js chooses (or one of equal expected difference) and gives the same confidence', async () => {
    const model = await loadShippedModel();
    const q = model.bins.count;
    const pixels = 600;
    let s = 7;
    const next = () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 4294967296) * 8 - 4;
    const logits = Float32Array.from({ length: pixels * q }, next);
    const table = decodingTable(model.bins);
    expect((await initBackend({ prefer: 'wasm' })).model).toBe('wasm');
    const probabilities = tf.tidy(() => tf.softmax(tf.tensor2d(logits, [pixels, q])).dataSync() as Float32Array);
    for (const decoding of ['least-ciede2000', 'annealed-mean'] as const) {
      const expected = tf.tidy(() => {
        const scores = tf.tensor2d(logits, [pixels, q]);
        const colour =
          decoding === 'annealed-mean'
            ? annealedMeanTensor(scores, model.bins, 0.38)
            : leastCiede2000(scores, model.bins, model.classWeights);
        const logp = tf.logSoftmax(scores);
        const confidence = tf.add(1, tf.div(tf.sum(tf.mul(tf.exp(logp), logp), -1), Math.log(q)));
        return { ab: colour.dataSync() as Float32Array, confidence: confidence.dataSync() as Float32Array };
      });
      // The expected CIEDE2000 difference of each candidate under a pixel's corrected distribution, in float64.
      const risk = (i: number, c: number): number => {
        let sum = 0;
        let total = 0;
        for (let j = 0; j < q; j++) {
          const p = Math.exp(logits[i * q + j]!) / model.classWeights[j]!;
          sum += p * table.difference[j * table.count + c]!;
          total += p;
        }
        return sum / total;
      };
      expect((await initBackend({ prefer: 'onnxruntime' })).model).toBe('onnxruntime');
      for (const input of ['logits', 'probabilities'] as const) {
        const spec = { decoding, input, bins: model.bins, classWeights: model.classWeights, temperature: 0.38, confidenceTemperature: 1 };
        const got = runDecoding(input === 'logits' ? logits : probabilities, pixels, spec);
        expect(maxDifference(got.confidence, expected.confidence)).toBeLessThan(1e-4);
        if (decoding === 'annealed-mean') {
          expect(maxDifference(got.colour, expected.ab)).toBeLessThan(0.01);
          continue;
        }
        for (let i = 0; i < pixels; i++) {
          const c = got.colour[i]!;
          const theirs = Array.from(table.a).findIndex((a, k) => a === expected.ab[2 * i] && table.b[k] === expected.ab[2 * i + 1]);
          if (c !== theirs) expect(Math.abs(risk(i, c) - risk(i, theirs))).toBeLessThan(1e-4 * risk(i, theirs));
        }
      }
      expect((await initBackend({ prefer: 'wasm' })).model).toBe('wasm');
    }
  });
});
