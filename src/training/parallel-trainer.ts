/**
 * Data-parallel training steps on worker threads: each batch is cut into one shard per worker, every
 * worker computes its shard's loss and gradients on its own replica of the network and its own
 * backend, and the run's one optimiser applies their weighted sum. The sum is taken in worker order,
 * so a run with the same seed and the same number of workers gives the same weights bit for bit.
 */
import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { fileURLToPath } from 'node:url';
import type * as tf from '@tensorflow/tfjs';
import { startWorker, type WorkerSlot } from '../worker-slot.js';
import { BACKBONE_CHANNELS, type BatchGradients, type BorrowedInputs, type Trainer } from '../model/index.js';
import type { FromGradientWorker, GradientWorkerInit, ToGradientWorker } from './gradient-protocol.js';

/** The built worker script. src/training and dist/training are both two levels below the package root. */
export const GRADIENT_WORKER_SCRIPT = new URL('../../dist/training/gradient-worker.js', import.meta.url);

/**
 * The number of workers a new run uses when none is asked for: one per core, at most one per crop of
 * a step. The native backend (tfjs-node) spreads each operation over the cores itself, so it gets one.
 */
export function defaultWorkers(batch: number, backend: string): number {
  return backend === 'tensorflow' ? 1 : Math.max(1, Math.min(availableParallelism(), batch));
}

/**
 * Crops per shard when n crops are shared by k workers: as even as it goes, the larger shards first.
 * @example
 * shardSizes(16, 3); // [6, 5, 5]
 */
export function shardSizes(n: number, k: number): number[] {
  return Array.from({ length: k }, (_, i) => Math.floor(n / k) + (i < n % k ? 1 : 0));
}

type Slot = WorkerSlot<BatchGradients>;

export interface ParallelTrainerOptions {
  /** Worker threads, at least 2 (1 is the trainer's own step). */
  workers: number;
  /** Rebalancing weight per bin, as the trainer's. */
  classWeights: Float32Array;
  /** The backend the run uses (BackendInfo.name); workers start the same one. */
  backend: string;
}

/**
 * Steps of `trainer` (which trains `network`) computed on worker threads.
 * @example
 * const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend: 'wasm' });
 * try { const loss = await parallel.step(L, ab, 16, 128, 128); } finally { await parallel.close(); }
 */
export class ParallelTrainer {
  private readonly slots: Slot[];
  private nextId = 1;
  private loaded = false;
  private closed = false;

  constructor(
    private readonly network: tf.LayersModel,
    private readonly trainer: Trainer,
    private readonly options: ParallelTrainerOptions,
  ) {
    if (!(Number.isInteger(options.workers) && options.workers >= 2))
      throw new RangeError(`ParallelTrainer: ${options.workers} workers; use the trainer itself for one`);
    if (!existsSync(fileURLToPath(GRADIENT_WORKER_SCRIPT))) {
      throw new Error(`kinhue is not built (${fileURLToPath(GRADIENT_WORKER_SCRIPT)} is missing): run npm run build`);
    }
    const init: GradientWorkerInit = {
      topology: network.toJSON(null, false) as Record<string, unknown>,
      names: trainer.names,
      classWeights: options.classWeights,
      backend: options.backend,
    };
    this.slots = Array.from({ length: options.workers }, () => this.spawn(init));
  }

  /** Workers computing each step. */
  get workers(): number {
    return this.slots.length;
  }

  /**
   * The loss and gradients of a whole batch, from its shards: the mean over all pixels, as one thread
   * would compute it (up to float rounding), since each shard's mean is weighted by its share of crops.
   * Once the workers have started, the shards go out before the first await.
   */
  async gradients(L: Float32Array, ab: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): Promise<BatchGradients> {
    if (this.closed) throw new Error('the parallel trainer is closed');
    if (L.length !== n * h * w || ab.length !== 2 * n * h * w) {
      throw new RangeError(`parallel step: ${L.length} L* and ${ab.length} a*b* values for ${n} crops of ${w} x ${h}`);
    }
    const sizes = shardSizes(n, this.slots.length);
    if (sizes.some((s) => s === 0))
      throw new RangeError(`${n} crops cannot be shared by ${this.slots.length} workers: each needs at least one`);
    if (!this.loaded) {
      await Promise.all(this.slots.map((s) => s.ready));
      // The untrained weights (a frozen encoder) travel once; the trained ones with every shard.
      const names = this.network.weights.map((w) => w.originalName);
      const values = this.network.weights.map((w) => Float32Array.from(w.read().dataSync() as Float32Array));
      for (const slot of this.slots) this.post(slot, { type: 'weights', names, values });
      this.loaded = true;
    }
    const values = this.trainer.values();
    let start = 0;
    const results = await Promise.all(
      this.slots.map((slot, k) => {
        const shard = cutShard(L, ab, h, w, borrowed, start, sizes[k]!);
        start += sizes[k]!;
        return this.request(slot, values, shard, h, w);
      }),
    );
    return combine(results, sizes, n);
  }

  /**
   * One optimiser step on a batch (arguments as Trainer.step's). Returns the batch loss. After the
   * first step, the shards are sent before this returns its promise: the caller may work meanwhile.
   */
  async step(L: Float32Array, ab: Float32Array, n: number, h: number, w: number, borrowed?: BorrowedInputs): Promise<number> {
    const { loss, grads } = await this.gradients(L, ab, n, h, w, borrowed);
    this.trainer.applyGradients(grads);
    return loss;
  }

  /** Ends every worker; safe to call more than once. */
  async close(): Promise<void> {
    this.closed = true;
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
  }

  private post(slot: Slot, message: ToGradientWorker, transfer: ArrayBuffer[] = []): void {
    if (slot.failure) throw slot.failure;
    slot.worker.postMessage(message, transfer);
  }

  private request(slot: Slot, values: Float32Array[], shard: Shard, h: number, w: number): Promise<BatchGradients> {
    const id = this.nextId++;
    return new Promise<BatchGradients>((resolve, reject) => {
      if (slot.failure) return reject(slot.failure);
      slot.pending = { id, resolve, reject };
      const transfer = [
        shard.L.buffer,
        shard.ab.buffer,
        ...(shard.borrowed ? [shard.borrowed.features8.buffer, shard.borrowed.features16.buffer, shard.borrowed.scene.buffer] : []),
      ];
      this.post(
        slot,
        { type: 'shard', id, values, L: shard.L, ab: shard.ab, n: shard.n, h, w, ...(shard.borrowed ? { borrowed: shard.borrowed } : {}) },
        transfer as ArrayBuffer[],
      );
    }).finally(() => {
      slot.pending = undefined;
    });
  }

  private spawn(init: GradientWorkerInit): Slot {
    return startWorker<FromGradientWorker, BatchGradients>(GRADIENT_WORKER_SCRIPT, init, {
      resultType: 'gradients',
      resultOf: (m) => {
        const { loss, grads } = m as Extract<FromGradientWorker, { type: 'gradients' }>;
        return { loss, grads };
      },
      errorText: (error) => `a training worker failed: ${error.message}`,
      exitText: (code) => (this.closed ? 'the parallel trainer is closed' : `a training worker stopped (exit code ${code})`),
    });
  }
}

interface Shard {
  n: number;
  L: Float32Array;
  ab: Float32Array;
  borrowed?: BorrowedInputs;
}

/** Copies crops [start, start + count) of a batch (copies, so that they can be handed to a worker). */
function cutShard(
  L: Float32Array,
  ab: Float32Array,
  h: number,
  w: number,
  borrowed: BorrowedInputs | undefined,
  start: number,
  count: number,
): Shard {
  const plane = h * w;
  const part = (a: Float32Array, per: number): Float32Array => a.slice(start * per, (start + count) * per);
  const C = BACKBONE_CHANNELS;
  return {
    n: count,
    L: part(L, plane),
    ab: part(ab, 2 * plane),
    ...(borrowed
      ? {
          borrowed: {
            features8: part(borrowed.features8, (plane / 64) * C.local8),
            features16: part(borrowed.features16, (plane / 256) * C.local16),
            scene: part(borrowed.scene, (plane / 256) * C.global),
          },
        }
      : {}),
  };
}

/** The batch's loss and gradients: each shard's weighted by its share of the crops, summed in worker order. */
function combine(results: BatchGradients[], sizes: number[], n: number): BatchGradients {
  const shares = sizes.map((s) => s / n);
  let loss = 0;
  results.forEach((r, k) => (loss += shares[k]! * r.loss));
  const grads = results[0]!.grads.map((_, i) => {
    let sum: Float32Array | null = null;
    results.forEach((r, k) => {
      const g = r.grads[i];
      if (!g) return;
      sum ??= new Float32Array(g.length);
      const share = shares[k]!;
      for (let j = 0; j < g.length; j++) sum[j] += share * g[j]!;
    });
    return sum;
  });
  return { loss, grads };
}
