import { spawn } from 'node:child_process';
import { mkdir, mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
  abBins,
  type BackboneFeatures,
  BACKBONE_CHANNELS,
  BACKBONE_GRID,
  createGradientComputer,
  createNetwork,
  createTrainer,
  encoderLayerNames,
  freezeEncoder,
  initBackend,
  type BatchGradients,
} from '../src/model/index.js';
import {
  CHECKPOINT_FILE,
  CropSampler,
  cutCrops,
  ParallelTrainer,
  type PhotoFeatures,
  type PhotoPlanes,
  Random,
  shardSizes,
  SUMMARY_FILE,
} from '../src/training/index.js';
import type { CropBatch } from '../src/training/index.js';
import { writeSkyGrassPhotos } from './helpers/sky-grass-photos.js';

// Data-parallel training steps on real worker threads (loaded from dist/, built by npm test) against
// the one-thread computation of the same crops. Tiny networks and 32-pixel crops keep this fast.

const BIN = join(dirname(fileURLToPath(import.meta.url)), '..', 'bin', 'kinhue.js');
const bins = abBins();
const classWeights = Float32Array.from({ length: bins.count }, (_, q) => 0.5 + (q % 7) / 6);
const S = 32;

/** Seeded photos of 48 x 40 and (for a network that reads them) their backbone features. Our own test data. */
function photoSet(count: number, seed: number, withBackbone: boolean): { photos: PhotoPlanes[]; features?: PhotoFeatures[] } {
  let s = seed >>> 0;
  const next = () => (s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 4294967296;
  const [width, height] = [48, 40];
  const plane = (f: (i: number) => number) => Float32Array.from({ length: width * height }, (_, i) => f(i));
  const photos = Array.from({ length: count }, (_, k) => ({
    width,
    height,
    L: plane((i) => 40 + 30 * Math.sin(i / 7 + k) + 20 * next()),
    a: plane((i) => 50 * Math.cos(i / 97 + k) + 10 * next()),
    b: plane((i) => 40 * Math.sin(i / 53 - k) + 10 * next()),
  }));
  if (!withBackbone) return { photos };
  const C = BACKBONE_CHANNELS;
  const features = (): BackboneFeatures => ({
    local8: new Float32Array(BACKBONE_GRID.local8 ** 2 * C.local8).map(() => next() - 0.5),
    local16: new Float32Array(BACKBONE_GRID.local16 ** 2 * C.local16).map(() => next() - 0.5),
    global: new Float32Array(C.global).map(() => next() - 0.5),
  });
  return { photos, features: photos.map(() => ({ plain: features(), mirrored: features() })) };
}

/** The largest difference over the largest magnitude, per weight. */
function worstRelative(a: BatchGradients, b: BatchGradients): number {
  let worst = 0;
  a.grads.forEach((g, i) => {
    const h = b.grads[i]!;
    let most = 0;
    let diff = 0;
    for (let j = 0; j < g!.length; j++) {
      most = Math.max(most, Math.abs(g![j]!));
      diff = Math.max(diff, Math.abs(g![j]! - h[j]!));
    }
    worst = Math.max(worst, diff / most);
  });
  return worst;
}

let backend: string;
let dir: string;
beforeAll(async () => {
  backend = (await initBackend()).name;
  dir = await mkdtemp(join(tmpdir(), 'kinhue-training-parallel-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe('parallel trainer', () => {
  it('shares a batch as evenly as it goes, the larger shards first', () => {
    expect(shardSizes(16, 2)).toEqual([8, 8]);
    expect(shardSizes(16, 3)).toEqual([6, 5, 5]);
    expect(shardSizes(3, 2)).toEqual([2, 1]);
  });

  for (const withBackbone of [false, true]) {
    it(`two workers give the one-thread gradient of the same crops, shards of 2 and 1 crops (${withBackbone ? 'with' : 'without'} the backbone's inputs)`, async () => {
      const net = createNetwork({ width: 4, seed: 3, backbone: withBackbone });
      const trainer = createTrainer(net, { learningRate: 1e-3, classWeights });
      const { photos, features } = photoSet(4, 7, withBackbone);
      const draws = new CropSampler(photos, new Random(7)).draw(3, S);
      const one = createGradientComputer(net, { classWeights, names: trainer.names });
      const gradientsOf = (crops: CropBatch): BatchGradients => one.compute(crops.L, crops.ab, crops.n, S, S, crops.borrowed);
      const whole = gradientsOf(cutCrops(photos, features, draws, S));
      const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend, photos, features });
      try {
        // The photos are moved into memory the workers share (the values unchanged: the gradients below agree).
        expect(photos[0]!.L.buffer).toBeInstanceOf(SharedArrayBuffer);
        if (features) expect(features[0]!.mirrored.local8.buffer).toBeInstanceOf(SharedArrayBuffer);
        const shared = await parallel.gradients(draws, S);
        expect(shared.grads.length).toBe(whole.grads.length);
        // Float32 sums taken in another order: agreement to 1e-5 of each weight's largest gradient
        // (float32 resolution is 6e-8; the convolutions' sums run over thousands of terms; common practice).
        // A plain mean of the two shards (not weighted 2:1) misses by far more than this.
        expect(worstRelative(whole, shared)).toBeLessThan(1e-5);
        expect(Math.abs(shared.loss - whole.loss) / whole.loss).toBeLessThan(1e-5);
        // Each shard on its own is far from the whole: the comparison means something.
        expect(worstRelative(whole, gradientsOf(cutCrops(photos, features, draws.slice(0, 2), S)))).toBeGreaterThan(1e-3);
      } finally {
        await parallel.close();
        trainer.dispose();
        net.dispose();
      }
    });
  }

  it('uses the crops cut ahead for the step they were drawn for, and others when a step asks for others', async () => {
    const net = createNetwork({ width: 4, seed: 5 });
    const trainer = createTrainer(net, { learningRate: 1e-3, classWeights });
    const { photos } = photoSet(5, 11, false);
    const sampler = new CropSampler(photos, new Random(3));
    const [first, announced, instead] = [sampler.draw(2, S), sampler.draw(2, S), sampler.draw(2, S)];
    const one = createGradientComputer(net, { classWeights, names: trainer.names });
    const expected = (draws: typeof first): BatchGradients => {
      const crops = cutCrops(photos, undefined, draws, S);
      return one.compute(crops.L, crops.ab, 2, S, S);
    };
    const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend, photos });
    try {
      // gradients() leaves the weights as they are: every answer can be checked against this thread's.
      await parallel.gradients(first, S, announced);
      expect(worstRelative(expected(instead), await parallel.gradients(instead, S, announced))).toBeLessThan(1e-5);
      const got = await parallel.gradients(announced, S);
      expect(worstRelative(expected(announced), got)).toBeLessThan(1e-5);
      expect(worstRelative(expected(instead), got)).toBeGreaterThan(1e-3);
    } finally {
      await parallel.close();
      trainer.dispose();
      net.dispose();
    }
  });

  it('keeps a frozen encoder fixed on its workers and trains the rest, the same in every run', async () => {
    const run = async (): Promise<Float32Array[]> => {
      const net = createNetwork({ width: 4, seed: 2 });
      freezeEncoder(net);
      const encoder = encoderLayerNames(net).map((n) => Float32Array.from(net.getLayer(n).getWeights()[0]!.dataSync() as Float32Array));
      const head = Float32Array.from(net.getLayer('logits').getWeights()[0]!.dataSync() as Float32Array);
      const trainer = createTrainer(net, { learningRate: 1e-2, classWeights });
      const { photos } = photoSet(4, 20, false);
      const sampler = new CropSampler(photos, new Random(20));
      const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend, photos });
      try {
        let draws = sampler.draw(4, S);
        for (let i = 0; i < 3; i++) {
          const next = sampler.draw(4, S);
          await parallel.step(draws, S, next);
          draws = next;
        }
        encoderLayerNames(net).forEach((n, i) =>
          expect(Array.from(net.getLayer(n).getWeights()[0]!.dataSync())).toEqual(Array.from(encoder[i]!)),
        );
        expect(Array.from(net.getLayer('logits').getWeights()[0]!.dataSync())).not.toEqual(Array.from(head));
        expect(trainer.steps).toBe(3);
        return net.getWeights().map((w) => Float32Array.from(w.dataSync() as Float32Array));
      } finally {
        await parallel.close();
        trainer.dispose();
        net.dispose();
      }
    };
    const a = await run();
    const b = await run();
    a.forEach((w, k) => expect(Buffer.from(w.buffer).equals(Buffer.from(b[k]!.buffer)), `weight ${k}`).toBe(true));
  });

  it("rejects a step with the worker's own error, stays usable, and closes", async () => {
    const net = createNetwork({ width: 4, seed: 1 });
    const trainer = createTrainer(net, { learningRate: 1e-3, classWeights });
    const { photos } = photoSet(3, 1, false);
    const sampler = new CropSampler(photos, new Random(1));
    const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend, photos });
    try {
      // Crops of 24 pixels do not fit the network's strides: the workers' own check fails, and its message comes back.
      await expect(parallel.step(sampler.draw(2, 24), 24)).rejects.toThrow(/multiples of 16, got 24 x 24/);
      // One crop cannot be shared by two workers: refused before any worker sees it.
      await expect(parallel.step(sampler.draw(1, S), S)).rejects.toThrow(RangeError);
      expect(trainer.steps).toBe(0);
      expect(await parallel.step(sampler.draw(2, S), S)).toBeGreaterThan(0);
      expect(trainer.steps).toBe(1);
    } finally {
      await parallel.close();
    }
    await expect(parallel.step(sampler.draw(2, S), S)).rejects.toThrow(/closed/);
    trainer.dispose();
    net.dispose();
  });

  it('needs the features of the photos for a network that reads the backbone: the workers say so', async () => {
    const net = createNetwork({ width: 4, seed: 1, backbone: true });
    const trainer = createTrainer(net, { learningRate: 1e-3, classWeights });
    const { photos } = photoSet(3, 1, false);
    const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend, photos });
    try {
      await expect(parallel.step(new CropSampler(photos, new Random(1)).draw(2, S), S)).rejects.toThrow(/the batch lacks them/);
    } finally {
      await parallel.close();
      trainer.dispose();
      net.dispose();
    }
  });
});

describe('kinhue train with worker threads, as a process', () => {
  /** Runs the CLI; `onStderr` sees stderr so far, as it comes. Resolves with the exit code and output. */
  function run(
    args: string[],
    onStderr: (text: string, child: ReturnType<typeof spawn>) => void = () => {},
  ): Promise<{ code: number | null; stdout: string; stderr: string }> {
    const child = spawn(process.execPath, [BIN, ...args], { stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    let stderr = '';
    child.stdout!.on('data', (chunk: Buffer) => (stdout += chunk.toString()));
    child.stderr!.on('data', (chunk: Buffer) => {
      stderr += chunk.toString();
      onStderr(stderr, child);
    });
    // A process that hangs (a worker thread left running) fails the test by this timeout.
    const timer = setTimeout(() => child.kill('SIGKILL'), 150_000);
    return new Promise((resolve) =>
      child.on('exit', (code) => {
        clearTimeout(timer);
        resolve({ code, stdout, stderr });
      }),
    );
  }

  const common = ['--batch', '3', '--crop', '32', '--no-backbone', '--workers', '2', '--eval-every', '1000', '--seed', '5'];

  it('stops after the step on Ctrl-C, writes its checkpoint and ends, workers and all', async () => {
    const out = join(dir, 'sigint');
    let sent = false;
    const r = await run(
      ['train', await writeSkyGrassPhotos(join(dir, 'photos')), '--out', out, '--steps', '100000', ...common],
      (text, child) => {
        if (!sent && /on 2 worker threads/.test(text)) {
          sent = true;
          child.kill('SIGINT');
        }
      },
    );
    expect(r.code).toBe(130); // stopped early, as restore reports it
    expect(r.stdout).toMatch(/interrupted; continue with --resume/);
    const summary = JSON.parse(await readFile(join(out, SUMMARY_FILE), 'utf8'));
    expect(summary.options.workers).toBe(2);
    expect(summary.stoppedBy).toBe('interrupted');
    await readFile(join(out, CHECKPOINT_FILE));
  }, 200_000);

  it('ends, workers and all, when the run fails mid-way', async () => {
    const out = join(dir, 'failing');
    let blocked = false;
    // A folder where the checkpoint goes: the first checkpoint (due after every step) cannot be written.
    const r = await run(
      [
        'train',
        await writeSkyGrassPhotos(join(dir, 'photos')),
        '--out',
        out,
        '--steps',
        '100000',
        '--checkpoint-minutes',
        '0.0001',
        ...common,
      ],
      (text) => {
        if (!blocked && /on 2 worker threads/.test(text)) {
          blocked = true;
          void mkdir(join(out, CHECKPOINT_FILE, 'in-the-way'), { recursive: true });
        }
      },
    );
    expect(blocked).toBe(true);
    expect(r.code).not.toBe(0);
    expect(r.code).not.toBeNull();
    expect(r.stderr).toMatch(new RegExp(CHECKPOINT_FILE.replace('.', '\\.')));
  }, 200_000);
});
