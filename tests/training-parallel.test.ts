import { spawn } from 'node:child_process';
import { mkdir, mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
  abBins,
  BACKBONE_CHANNELS,
  createGradientComputer,
  createNetwork,
  createTrainer,
  encoderLayerNames,
  freezeEncoder,
  initBackend,
  type BatchGradients,
  type BorrowedInputs,
} from '../src/model/index.js';
import { CHECKPOINT_FILE, ParallelTrainer, shardSizes, SUMMARY_FILE } from '../src/training/index.js';
import { writeSkyGrassPhotos } from './helpers/sky-grass-photos.js';

// Data-parallel training steps on real worker threads (loaded from dist/, built by npm test) against
// the one-thread computation of the same batch. Tiny networks and 32-pixel crops keep this fast.

const BIN = join(dirname(fileURLToPath(import.meta.url)), '..', 'bin', 'kinhue.js');
const bins = abBins();
const classWeights = Float32Array.from({ length: bins.count }, (_, q) => 0.5 + (q % 7) / 6);
const S = 32;

/** A seeded batch of n crops: L*, a*b* and (for a network that reads one) backbone features. Our own test data. */
function batch(n: number, seed: number, withBackbone: boolean): { L: Float32Array; ab: Float32Array; borrowed?: BorrowedInputs } {
  let s = seed >>> 0;
  const next = () => (s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 4294967296;
  const L = new Float32Array(n * S * S).map((_, i) => 40 + 30 * Math.sin(i / 7) + 20 * next());
  const ab = new Float32Array(n * 2 * S * S).map((_, i) => 50 * Math.cos(i / 97 + seed) + 10 * next());
  if (!withBackbone) return { L, ab };
  const C = BACKBONE_CHANNELS;
  const cells8 = (S / 8) ** 2;
  const cells16 = (S / 16) ** 2;
  return {
    L,
    ab,
    borrowed: {
      features8: new Float32Array(n * cells8 * C.local8).map(() => next() - 0.5),
      features16: new Float32Array(n * cells16 * C.local16).map(() => next() - 0.5),
      scene: new Float32Array(n * cells16 * C.global).map(() => next() - 0.5),
    },
  };
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
    it(`two workers give the one-thread gradient of the same batch, shards of 2 and 1 crops (${withBackbone ? 'with' : 'without'} the backbone's inputs)`, async () => {
      const net = createNetwork({ width: 4, seed: 3, backbone: withBackbone });
      const trainer = createTrainer(net, { learningRate: 1e-3, classWeights });
      const d = batch(3, 7, withBackbone);
      const whole = createGradientComputer(net, { classWeights, names: trainer.names }).compute(d.L, d.ab, 3, S, S, d.borrowed);
      const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend });
      try {
        const shared = await parallel.gradients(d.L, d.ab, 3, S, S, d.borrowed);
        expect(shared.grads.length).toBe(whole.grads.length);
        // Float32 sums taken in another order: agreement to 1e-5 of each weight's largest gradient
        // (float32 resolution is 6e-8; the convolutions' sums run over thousands of terms; common practice).
        // A plain mean of the two shards (not weighted 2:1) misses by far more than this.
        expect(worstRelative(whole, shared)).toBeLessThan(1e-5);
        expect(Math.abs(shared.loss - whole.loss) / whole.loss).toBeLessThan(1e-5);
        // Each shard on its own is far from the whole: the comparison means something.
        const first = createGradientComputer(net, { classWeights, names: trainer.names }).compute(
          d.L.slice(0, 2 * S * S),
          d.ab.slice(0, 4 * S * S),
          2,
          S,
          S,
          d.borrowed && {
            features8: d.borrowed.features8.slice(0, 2 * 16 * BACKBONE_CHANNELS.local8),
            features16: d.borrowed.features16.slice(0, 2 * 4 * BACKBONE_CHANNELS.local16),
            scene: d.borrowed.scene.slice(0, 2 * 4 * BACKBONE_CHANNELS.global),
          },
        );
        expect(worstRelative(whole, first)).toBeGreaterThan(1e-3);
      } finally {
        await parallel.close();
        trainer.dispose();
        net.dispose();
      }
    });
  }

  it('keeps a frozen encoder fixed on its workers and trains the rest, the same in every run', async () => {
    const run = async (): Promise<Float32Array[]> => {
      const net = createNetwork({ width: 4, seed: 2 });
      freezeEncoder(net);
      const encoder = encoderLayerNames(net).map((n) => Float32Array.from(net.getLayer(n).getWeights()[0]!.dataSync() as Float32Array));
      const head = Float32Array.from(net.getLayer('logits').getWeights()[0]!.dataSync() as Float32Array);
      const trainer = createTrainer(net, { learningRate: 1e-2, classWeights });
      const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend });
      try {
        for (let i = 0; i < 3; i++) {
          const d = batch(4, 20 + i, false);
          await parallel.step(d.L, d.ab, 4, S, S);
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
    const net = createNetwork({ width: 4, seed: 1, backbone: true });
    const trainer = createTrainer(net, { learningRate: 1e-3, classWeights });
    const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend });
    try {
      const d = batch(2, 1, true);
      // Without the backbone's inputs the workers' network cannot run: their error comes back.
      await expect(parallel.step(d.L, d.ab, 2, S, S)).rejects.toThrow(/the batch lacks them/);
      // Sizes that do not add up are refused before any worker sees them.
      await expect(parallel.step(d.L, d.ab, 3, S, S, d.borrowed)).rejects.toThrow(RangeError);
      expect(trainer.steps).toBe(0);
      expect(await parallel.step(d.L, d.ab, 2, S, S, d.borrowed)).toBeGreaterThan(0);
      expect(trainer.steps).toBe(1);
    } finally {
      await parallel.close();
    }
    await expect(parallel.step(new Float32Array(2 * S * S), new Float32Array(4 * S * S), 2, S, S)).rejects.toThrow(/closed/);
    trainer.dispose();
    net.dispose();
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
