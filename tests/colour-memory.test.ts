import { spawnSync } from 'node:child_process';
import { mkdir, mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { memoryGuide, type ModelMemory } from '../src/batch/index.js';
import { labToSrgb, srgbToLab } from '../src/colour/index.js';
import { seededUniform } from '../src/random.js';
import { abBins, createNetwork, initBackend, predict, recallColours, rememberCells, type ColourMemory } from '../src/model/index.js';
import { writeSkyGrassPhotos } from './helpers/sky-grass-photos.js';
import { saveUntrainedModel } from './helpers/untrained-model.js';

// The colour memory on synthetic data: features made by hand (one-hot rows), so which memory cell a scan
// cell matches is known; the decoder features predict recovers from the logits, checked against the
// decoder layer's own output; and restore and score with --memory as a person runs them (an untrained model:
// the record and the order of things do not depend on colour quality).

/** One-hot feature rows of `dims` channels. */
function oneHot(hot: number[], dims: number): Float32Array {
  const out = new Float32Array(hot.length * dims);
  hot.forEach((h, i) => {
    if (h >= 0) out[i * dims + h] = 1;
  });
  return out;
}

/** Four memory cells, one per channel 0-3 of 5, each of its own colour; channel 4 is never remembered. */
const COLOURS: Array<[number, number]> = [
  [40, -20],
  [-30, 35],
  [10, 50],
  [-5, -40],
];
const DIMS = 5;
function fourCells(): ColourMemory {
  return rememberCells([
    {
      features: oneHot([0, 1, 2, 3], DIMS),
      dims: DIMS,
      a: Float32Array.from(COLOURS, (c) => c[0]),
      b: Float32Array.from(COLOURS, (c) => c[1]),
    },
  ]);
}

describe('recallColours', () => {
  it('gives a scan cell that matches a memory cell exactly its colour, fully trusted, and an unmatched cell no weight', () => {
    const memory = fourCells();
    const out = recallColours(memory, oneHot([1, 4, 3, -1], DIMS));
    expect(out.a[0]).toBeCloseTo(-30, 3);
    expect(out.b[0]).toBeCloseTo(35, 3);
    expect(out.weight[0]).toBeCloseTo(1, 3);
    expect(out.a[2]).toBeCloseTo(-5, 3);
    expect(out.weight[2]).toBeCloseTo(1, 3);
    // Similarity 0 (an unremembered channel, or no features at all) is under the match floor.
    expect(out.weight[1]).toBe(0);
    expect(out.weight[3]).toBe(0);
  });

  it('trusts less where the nearest cells disagree', () => {
    // Two memory cells with the same features and opposite colours, and a third elsewhere: the colour is the
    // mean of the two, their spread 40.
    const memory = rememberCells([
      { features: oneHot([0, 0, 1], 2), dims: 2, a: Float32Array.of(40, -40, 0), b: Float32Array.of(0, 0, 30) },
    ]);
    const out = recallColours(memory, oneHot([0], 2), { spread: 40 });
    expect(out.a[0]).toBeCloseTo(0, 3);
    expect(out.b[0]).toBeCloseTo(0, 3);
    // Agreement 1 / (1 + (spread / 40)^2) = 0.5 at a spread of 40 (the setting's definition).
    expect(out.weight[0]).toBeCloseTo(0.5, 3);
  });

  it('recalls the same on ONNX Runtime as on TensorFlow.js', async () => {
    // Random features (ties between neighbours all but impossible): float32 sums in another order differ
    // by about 1e-6, far below the tolerances (ours) that a visible colour difference would need.
    const next = seededUniform(7);
    const random = (n: number) => Float32Array.from({ length: n }, () => next() * 2 - 1);
    const cells = 600;
    const memory = rememberCells([
      { features: random(cells * 8), dims: 8, a: random(cells).map((v) => 60 * v), b: random(cells).map((v) => 60 * v) },
    ]);
    const query = random(1500 * 8);
    // A low match floor, so that most cells get a weight to compare.
    const settings = { matchFloor: 0.2, matchFull: 0.9 };
    try {
      expect((await initBackend({ prefer: 'onnxruntime' })).model).toBe('onnxruntime');
      const native = recallColours(memory, query, settings);
      expect((await initBackend({ prefer: 'wasm' })).model).toBe('wasm');
      const tfjs = recallColours(memory, query, settings);
      let weighted = 0;
      for (let i = 0; i < 1500; i++) {
        expect(Math.abs(native.a[i]! - tfjs.a[i]!)).toBeLessThan(1e-3);
        expect(Math.abs(native.b[i]! - tfjs.b[i]!)).toBeLessThan(1e-3);
        expect(Math.abs(native.weight[i]! - tfjs.weight[i]!)).toBeLessThan(1e-4);
        if (tfjs.weight[i]! > 0) weighted++;
      }
      expect(weighted).toBeGreaterThan(500);
    } finally {
      await initBackend();
    }
  });

  it('keeps up to the asked number of cells per photo, the same ones on every run', () => {
    const n = 50;
    const photo = {
      features: Float32Array.from({ length: n * 2 }, (_, i) => (i % 2 ? 1 : i / 2)),
      dims: 2,
      a: Float32Array.from({ length: n }, (_, i) => i),
      b: new Float32Array(n),
    };
    const one = rememberCells([photo, photo], { cellsPerPhoto: 10 });
    const two = rememberCells([photo, photo], { cellsPerPhoto: 10 });
    expect(one.a.length).toBe(20);
    expect(one.photos).toBe(2);
    expect(Array.from(one.a)).toEqual(Array.from(two.a));
    expect(new Set(one.a.slice(0, 10)).size).toBe(10);
    // Each kept row is the unit-length version of its cell's features.
    const cell = one.a[0]!;
    expect(one.features[0]).toBeCloseTo(cell / Math.hypot(cell, 1), 5);
  });
});

describe('memoryGuide', () => {
  // A working size of 8 x 8 over a 2 x 2 grid of cells; the top-left cell is darker than the rest, so the
  // edge-aware carrying of the change keeps it to that quarter.
  const W = 8;
  const L = Float32Array.from({ length: W * W }, (_, i) => (i % W < 4 && i < W * 4 ? 30 : 70));
  const scan = { features: { data: oneHot([0, 4, 4, 4], DIMS), dims: DIMS }, confidenceWidth: 2, confidenceHeight: 2 };
  const memory: ModelMemory = { memory: fourCells(), sha256: 'f'.repeat(64), photos: 1 };
  const predicted = { a: new Float32Array(W * W).fill(3), b: new Float32Array(W * W).fill(-2) };

  it('colours the region whose features match, leaves the rest as predicted, and counts what it changed', () => {
    const out = memoryGuide(memory, scan).apply({ width: W, height: W, L, ...predicted, confidence: new Float32Array(W * W) });
    for (let i = 0; i < W * W; i++) {
      if (L[i] === 30) {
        // Within 0.5: the bilateral grid's interpolation (our own tolerance).
        expect(out.a[i]).toBeCloseTo(40, 0);
        expect(out.b[i]).toBeCloseTo(-20, 0);
      } else {
        // Unmatched: the model's colour, but for what the grid's interpolation carries across the edge (under 0.1, our own tolerance).
        expect(Math.abs(out.a[i]! - 3)).toBeLessThan(0.1);
        expect(Math.abs(out.b[i]! + 2)).toBeLessThan(0.1);
      }
    }
    expect(out.record).toMatchObject({ sha256: memory.sha256, photos: 1, cells: 4, pixels: 16, share: 0.25 });
  });

  it('changes nothing when no cell matches', () => {
    const none = { ...scan, features: { data: oneHot([4, 4, 4, -1], DIMS), dims: DIMS } };
    const out = memoryGuide(memory, none).apply({ width: W, height: W, L, ...predicted, confidence: new Float32Array(W * W) });
    expect(Array.from(out.a)).toEqual(Array.from(predicted.a));
    expect(Array.from(out.b)).toEqual(Array.from(predicted.b));
    expect(out.record).toMatchObject({ pixels: 0, share: 0 });
  });
});

describe('cell features', () => {
  it("are the decoder's last feature map, recovered from the logits", async () => {
    await initBackend();
    const network = createNetwork({ bins: abBins().count, width: 8, seed: 5 });
    try {
      const size = 32;
      const L = Float32Array.from({ length: size * size }, (_, i) => 50 + 40 * Math.sin(i / 7) * Math.cos(i / 53));
      const p = predict(network, L, size, size, { cellFeatures: true });
      const decoder = tf.model({ inputs: network.inputs, outputs: network.getLayer('dec2').output as tf.SymbolicTensor });
      const direct = tf.tidy(
        () =>
          decoder.predict(
            tf.tensor4d(
              L.map((v) => v / 100 - 0.5),
              [1, size, size, 1],
            ),
          ) as tf.Tensor,
      );
      const expected = direct.dataSync() as Float32Array;
      direct.dispose();
      expect(p.features!.dims).toBe(24);
      expect(p.features!.data.length).toBe(expected.length);
      let largest = 0;
      for (const v of expected) largest = Math.max(largest, Math.abs(v));
      // Float32 logits from another runtime: agreement to 1e-3 of the largest feature (our own tolerance).
      for (let i = 0; i < expected.length; i++) expect(Math.abs(p.features!.data[i]! - expected[i]!)).toBeLessThan(1e-3 * largest);
    } finally {
      network.dispose();
    }
  });
});

describe('restore and score with --memory', () => {
  const BIN = join(__dirname, '..', 'bin', 'kinhue.js');
  const W = 64,
    H = 48;
  let root: string;
  const cli = (args: string[]) => spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', timeout: 180_000 });

  const png = (data: Uint8Array, channels: 1 | 3, file: string) =>
    sharp(data, { raw: { width: W, height: H, channels } })
      .png()
      .toFile(file);

  beforeAll(async () => {
    root = await mkdtemp(join(tmpdir(), 'kinhue-memory-'));
    await saveUntrainedModel(join(root, 'model'));
    await writeSkyGrassPhotos(join(root, 'memory'), 2);
    await mkdir(join(root, 'scans'));
    // The scan: the first memory photo without its colour (L* kept), so its cells find themselves in the memory.
    const { data } = await sharp(join(root, 'memory', 'p0.png'))
      .raw()
      .toBuffer({ resolveWithObject: true });
    const lab = srgbToLab(new Uint8Array(data), 3);
    const grey = labToSrgb({ L: lab.L, a: new Float32Array(W * H), b: new Float32Array(W * H) }, new Uint8Array(W * H * 3), 3);
    await png(grey, 3, join(root, 'scans', 'barn-scan.png'));
  });

  afterAll(async () => {
    await rm(root, { recursive: true, force: true });
  });

  it('records the memory in the settings and the scan record, and redoes a scan restored without it', async () => {
    const out = join(root, 'out');
    const base = ['restore', join(root, 'scans'), '--out', out, '--model', join(root, 'model'), '--jobs', '1', '--no-skin'];
    expect(cli(base).status).toBe(0);
    const without = JSON.parse(await readFile(join(out, 'barn-scan.kinhue.json'), 'utf8'));
    expect(without.guidance?.memory).toBeUndefined();

    const run = cli([...base, '--memory', join(root, 'memory'), '--json']);
    expect(run.status, run.stderr).toBe(0);
    expect(JSON.parse(run.stdout)).toMatchObject({ done: 1 });
    const record = JSON.parse(await readFile(join(out, 'barn-scan.kinhue.json'), 'utf8'));
    expect(record.settings.memory.folder).toBe(join(root, 'memory'));
    expect(record.settings.memory.sha256).toMatch(/^[0-9a-f]{64}$/);
    expect(record.guidance.memory).toMatchObject({ sha256: record.settings.memory.sha256, photos: 2 });
    expect(record.guidance.memory.cells).toBe(2 * (W / 4) * (H / 4));
    expect(record.guidance.memory.share).toBeGreaterThan(0);
    expect(record.guidance.memory.share).toBeLessThanOrEqual(1);
  });

  it('refuses a memory with a grey photo before any scan, naming the photo', async () => {
    const memory = join(root, 'grey-memory');
    await mkdir(memory);
    await writeSkyGrassPhotos(memory, 1);
    await png(new Uint8Array(W * H).fill(120), 1, join(memory, 'wall.png'));
    const run = cli(['restore', join(root, 'scans'), '--out', join(root, 'out-grey'), '--model', join(root, 'model'), '--memory', memory]);
    expect(run.status).toBe(1);
    expect(run.stderr).toContain('KH_BAD_DATA');
    expect(run.stderr).toContain(join(memory, 'wall.png'));
    expect(run.stderr).toContain('memory');
  });

  it('score puts each model beside itself with the memory', () => {
    const run = cli(['score', join(root, 'memory', 'p1.png'), '--model', join(root, 'model'), '--memory', join(root, 'memory'), '--json']);
    expect(run.status, run.stderr).toBe(0);
    const report = JSON.parse(run.stdout);
    const ids = report.methods.map((m: { id: string }) => m.id);
    expect(ids).toEqual(['grey', 'transfer:1', 'model:1', 'memory:1']);
    expect(report.methods[3]).toMatchObject({ kind: 'model', memory: { photos: 2 } });
    expect(report.methods[3].label).toContain('+ memory');
    // The scored photo is one of the memory's own: the report says its figures flatter the memory.
    expect(report.notes.join('\n')).toContain('1 scored photo is in the memory itself');
    // Remembered, a photo is recalled: closer to itself than the model alone.
    expect(report.average.figures['memory:1'].ciede2000).toBeLessThan(report.average.figures['model:1'].ciede2000);
  });
});
