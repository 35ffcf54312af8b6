import { createHash } from 'node:crypto';
import { mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import * as tf from '@tensorflow/tfjs';
import { ErrorCodes, ModelError } from '../src/errors.js';
import { initBackend } from '../src/model/backend.js';
import { abBins } from '../src/model/bins.js';
import { annealedMean, confidence } from '../src/model/encoding.js';
import { createNetwork, toNetworkInput } from '../src/model/network.js';
import { predict } from '../src/model/predict.js';
import { loadModel, saveModel } from '../src/model/storage.js';
import { VERSION } from '../src/version.js';

// Model folders: TensorFlow.js layers format (model.json + weights.bin, read back by
// tf.loadLayersModel itself) and kinhue-model.json, whose weights hash is checked against Node's
// own SHA-256. Prediction is checked against the plain-array decoding in encoding.ts.

const bins = abBins();
let root: string;
let net: tf.LayersModel;

beforeAll(async () => {
  await initBackend();
  root = mkdtempSync(join(tmpdir(), 'kinhue-model-storage-'));
  net = createNetwork({ width: 4, seed: 11 });
});
afterAll(() => {
  net.dispose();
  rmSync(root, { recursive: true, force: true });
});

function plane(width: number, height: number): Float32Array {
  return Float32Array.from({ length: width * height }, (_, i) => ((i * 37) % 101) * 0.99);
}

async function expectModelError(dir: string, pattern: RegExp): Promise<void> {
  const error = await loadModel(dir).then(
    () => undefined,
    (e: unknown) => e,
  );
  expect(error).toBeInstanceOf(ModelError);
  const e = error as ModelError;
  expect(e.code).toBe(ErrorCodes.BAD_MODEL);
  expect(e.file).toBe(dir);
  expect(e.hint).toBeTruthy();
  expect(e.message).toMatch(pattern);
}

describe('model folders', () => {
  it('saves a fresh network and loads it back to give the same predictions', async () => {
    const dir = join(root, 'fresh');
    const classWeights = Float32Array.from({ length: bins.count }, (_, q) => 1 + q / bins.count);
    const meta = await saveModel(net, dir, { name: 'fresh-test', classWeights, training: { photos: 0, note: 'untrained' } });
    expect(readdirSync(dir).sort()).toEqual(['kinhue-model.json', 'model.json', 'weights.bin']);
    expect(meta.weightsSha256).toBe(
      createHash('sha256')
        .update(readFileSync(join(dir, 'weights.bin')))
        .digest('hex'),
    );
    expect(meta.kinhueVersion).toBe(VERSION);
    expect(meta.bins.count).toBe(bins.count);
    expect(meta.temperature).toBe(0.38);

    const model = await loadModel(dir);
    expect(model.meta.name).toBe('fresh-test');
    expect(model.meta.training).toEqual({ photos: 0, note: 'untrained' });
    expect(Array.from(model.classWeights)).toEqual(Array.from(classWeights));
    expect(Array.from(model.bins.a)).toEqual(Array.from(bins.a));
    const L = plane(40, 24);
    expect(model.meta.decoding).toBe('least-ciede2000');
    // The loaded model decodes with its own class weights; the bare network is given the same ones.
    const p1 = predict(net, L, 40, 24, { classWeights });
    const p2 = predict(model, L, 40, 24);
    expect(Array.from(p2.a)).toEqual(Array.from(p1.a));
    expect(Array.from(p2.confidence)).toEqual(Array.from(p1.confidence));
    model.network.dispose();
  });

  it('keeps other files in the folder and replaces the model in place', async () => {
    const dir = join(root, 'with-card');
    mkdirSync(dir);
    writeFileSync(join(dir, 'MODEL_CARD.md'), '# card\n');
    await saveModel(net, dir);
    await saveModel(net, dir, { temperature: 0.5 });
    expect(readdirSync(dir).sort()).toEqual(['MODEL_CARD.md', 'kinhue-model.json', 'model.json', 'weights.bin']);
    const model = await loadModel(dir);
    expect(model.meta.temperature).toBe(0.5);
    expect(model.meta.name).toBe('with-card');
    model.network.dispose();
  });

  it('refuses a missing folder, a plain file, a folder that is not a kinhue model and damaged weights', async () => {
    await expectModelError(join(root, 'nowhere'), /not found/);
    const file = join(root, 'file.txt');
    writeFileSync(file, 'x');
    await expectModelError(file, /folder/);
    const empty = join(root, 'empty');
    mkdirSync(empty);
    await expectModelError(empty, /not a kinhue model/);
    const other = join(root, 'other');
    mkdirSync(other);
    writeFileSync(join(other, 'kinhue-model.json'), JSON.stringify({ format: 'something-else' }));
    await expectModelError(other, /does not describe a kinhue model/);

    const damaged = join(root, 'damaged');
    await saveModel(net, damaged);
    const weights = readFileSync(join(damaged, 'weights.bin'));
    weights[100] ^= 1;
    writeFileSync(join(damaged, 'weights.bin'), weights);
    await expectModelError(damaged, /SHA-256/);

    const noWeights = join(root, 'no-weights');
    await saveModel(net, noWeights);
    rmSync(join(noWeights, 'weights.bin'));
    await expectModelError(noWeights, /weights\.bin is missing/);
  });
});

describe('predict', () => {
  it('returns a quarter of any size, padded and cropped back', () => {
    for (const [w, h] of [
      [64, 48],
      [37, 23],
      [1, 1],
      [17, 130],
    ]) {
      const p = predict(net, plane(w, h), w, h);
      expect([p.width, p.height]).toEqual([Math.ceil(w / 4), Math.ceil(h / 4)]);
      expect(p.a.length).toBe(p.width * p.height);
      expect(p.confidence.every((c) => c >= 0 && c <= 1)).toBe(true);
    }
    expect(() => predict(net, new Float32Array(10), 4, 4)).toThrow(RangeError);
  });

  it('matches the plain-array annealed mean and confidence of the raw logits', () => {
    const w = 32;
    const h = 16;
    const L = plane(w, h);
    const logits = tf.tidy(() => (net.predict(tf.tensor4d(toNetworkInput(L), [1, h, w, 1])) as tf.Tensor).dataSync() as Float32Array);
    for (const t of [0.38, 1]) {
      const p = predict(net, L, w, h, { temperature: t });
      const want = annealedMean(logits, bins, t);
      const conf = confidence(logits, bins.count, 1);
      for (let i = 0; i < p.a.length; i++) {
        expect(p.a[i]).toBeCloseTo(want.a[i], 3);
        expect(p.b[i]).toBeCloseTo(want.b[i], 3);
        expect(p.confidence[i]).toBeCloseTo(conf[i], 4);
      }
    }
  });

  it('repeats edge pixels when padding: an image and its padded copy agree inside', () => {
    // A 30 x 20 image is padded to 32 x 32 by repeating its last column and row; predicting the
    // explicitly padded 32 x 32 image must give the same numbers where the two overlap.
    const w = 30;
    const h = 20;
    const L = plane(w, h);
    const padded = new Float32Array(32 * 32);
    for (let y = 0; y < 32; y++) for (let x = 0; x < 32; x++) padded[y * 32 + x] = L[Math.min(y, h - 1) * w + Math.min(x, w - 1)];
    const p = predict(net, L, w, h);
    const q = predict(net, padded, 32, 32);
    for (let y = 0; y < p.height; y++) {
      for (let x = 0; x < p.width; x++) expect(p.a[y * p.width + x]).toBe(q.a[y * q.width + x]);
    }
  });
});
