/**
 * Data-parallel training steps on worker threads: the crops drawn for a step are shared out, one shard
 * per worker; every worker cuts its own crops from the photos, in shared memory, and computes their
 * loss and gradients on its own replica of the network and its own backend; the run's one optimiser
 * applies their weighted sum. The sum is taken in worker order, so a run with the same seed and the
 * same number of workers gives the same weights bit for bit. Values, gradients and photos travel
 * through shared memory: the main thread copies no batch and no gradient per worker.
 */
import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { fileURLToPath } from 'node:url';
import { setFlagsFromString } from 'node:v8';
import type * as tf from '@tensorflow/tfjs';
import { startWorker, type WorkerSlot } from '../worker-slot.js';
import type { BatchGradients, Trainer } from '../model/index.js';
import type { CropDraw, PhotoFeatures, PhotoPlanes } from './crop-sampler.js';
import type { FromGradientWorker, GradientWorkerInit, ToGradientWorker } from './gradient-protocol.js';

/**
 * The old generation a worker's heap starts with, in MB. A training step's tensors (about 20 MB of
 * live objects in each worker) otherwise outgrow V8's first limits, and every worker ran a full
 * collection about twice a step, on the cores the steps need.
 */
const WORKER_OLD_SPACE_MB = 64;

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

/** What a worker answers a step with; its gradients are in its shared buffer. */
interface ShardResult {
  loss: number;
  reached: boolean[];
}

type Slot = WorkerSlot<ShardResult>;

export interface ParallelTrainerOptions {
  /** Worker threads, at least 2 (1 is the trainer's own step). */
  workers: number;
  /** Rebalancing weight per bin, as the trainer's. */
  classWeights: Float32Array;
  /** The backend the run uses (BackendInfo.name); workers start the same one. */
  backend: string;
  /**
   * The photos the crops are drawn from (the sampler's, in its order) and their backbone features.
   * Their arrays are moved into shared memory, in place (the same values), so that every worker reads
   * them without a copy of its own and no second copy stays.
   */
  photos: PhotoPlanes[];
  features?: PhotoFeatures[];
}

/**
 * Steps of `trainer` (which trains `network`) computed on worker threads.
 * @example
 * const parallel = new ParallelTrainer(net, trainer, { workers: 2, classWeights, backend: 'wasm', photos, features });
 * try { const loss = await parallel.step(sampler.draw(16, 128), 128); } finally { await parallel.close(); }
 */
export class ParallelTrainer {
  private readonly slots: Slot[];
  /** The trained weights' values for the next step, one after another (shared with every worker). */
  private readonly values: Float32Array;
  /** Each worker's gradients, laid out as `values` (shared with that worker). */
  private readonly shardGradients: Float32Array[];
  /** The batch's gradients, laid out as `values`: what gradients() returns views of. */
  private readonly sum: Float32Array;
  private readonly lengths: number[];
  private nextId = 1;
  private nextBatch = 1;
  /** Crops the workers were sent ahead of their step, and the batch number they were cut for. */
  private ahead?: { draws: readonly CropDraw[]; size: number; batch: number };
  private loaded = false;
  private closed = false;

  constructor(
    private readonly network: tf.LayersModel,
    private readonly trainer: Trainer,
    options: ParallelTrainerOptions,
  ) {
    if (!(Number.isInteger(options.workers) && options.workers >= 2))
      throw new RangeError(`ParallelTrainer: ${options.workers} workers; use the trainer itself for one`);
    if (!existsSync(fileURLToPath(GRADIENT_WORKER_SCRIPT))) {
      throw new Error(`kinhue is not built (${fileURLToPath(GRADIENT_WORKER_SCRIPT)} is missing): run npm run build`);
    }
    shareInPlace(options.photos, options.features);
    this.lengths = trainer.values().map((v) => v.length);
    const total = this.lengths.reduce((sum, n) => sum + n, 0);
    this.values = sharedFloats(total);
    this.sum = new Float32Array(total);
    this.shardGradients = Array.from({ length: options.workers }, () => sharedFloats(total));
    // Read by V8 when a worker's heap is made (Worker's resourceLimits cannot set it); this thread's heap is made already.
    setFlagsFromString(`--initial-old-space-size=${WORKER_OLD_SPACE_MB}`);
    this.slots = this.shardGradients.map((gradients) =>
      this.spawn({
        topology: network.toJSON(null, false) as Record<string, unknown>,
        names: trainer.names,
        classWeights: options.classWeights,
        backend: options.backend,
        photos: options.photos.map(({ width, height, L, a, b }) => ({ width, height, L, a, b })),
        ...(options.features ? { features: options.features } : {}),
        values: this.values,
        gradients,
      }),
    );
  }

  /** Workers computing each step. */
  get workers(): number {
    return this.slots.length;
  }

  /**
   * The loss and gradients of the batch of `draws` (crops of `size` x `size`), from its shards: the
   * mean over all pixels, as one thread would compute it (up to float rounding), since each shard's
   * mean is weighted by its share of crops. The gradients are views, valid until the next step.
   * `next`, the crops of the next step when known, are cut by the workers as soon as this step's are
   * done, while the optimiser runs. Once the workers have started, the step goes out before the first await.
   */
  async gradients(draws: readonly CropDraw[], size: number, next?: readonly CropDraw[]): Promise<BatchGradients> {
    if (this.closed) throw new Error('the parallel trainer is closed');
    const sizes = this.shards(draws.length);
    if (next) this.shards(next.length);
    if (!this.loaded) {
      await Promise.all(this.slots.map((s) => s.ready));
      // The untrained weights (a frozen encoder) travel once; the trained ones through shared memory.
      const names = this.network.weights.map((w) => w.originalName);
      const values = this.network.weights.map((w) => Float32Array.from(w.read().dataSync() as Float32Array));
      for (const slot of this.slots) this.post(slot, { type: 'weights', names, values });
      this.loaded = true;
    }
    let offset = 0;
    this.trainer.values().forEach((v) => {
      this.values.set(v, offset);
      offset += v.length;
    });
    const sent = this.ahead;
    this.ahead = undefined;
    const batch = sent && sent.draws === draws && sent.size === size ? sent.batch : this.sendCrops(draws, size);
    const results = this.slots.map((slot) => this.request(slot, batch));
    if (next) this.ahead = { draws: next, size, batch: this.sendCrops(next, size) };
    return this.combine(results, sizes, draws.length);
  }

  /**
   * One optimiser step on the batch of `draws` (arguments as gradients()'). Returns the batch loss.
   * After the first step, the step is sent before this returns its promise: the caller may work meanwhile.
   */
  async step(draws: readonly CropDraw[], size: number, next?: readonly CropDraw[]): Promise<number> {
    const { loss, grads } = await this.gradients(draws, size, next);
    this.trainer.applyGradients(grads);
    return loss;
  }

  /** Ends every worker; safe to call more than once. */
  async close(): Promise<void> {
    this.closed = true;
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
  }

  /** Crops per worker for a batch of n; every worker needs at least one. */
  private shards(n: number): number[] {
    const sizes = shardSizes(n, this.slots.length);
    if (sizes.some((s) => s === 0))
      throw new RangeError(`${n} crops cannot be shared by ${this.slots.length} workers: each needs at least one`);
    return sizes;
  }

  /** Sends each worker its shard of `draws` to cut; returns the batch number they are cut for. */
  private sendCrops(draws: readonly CropDraw[], size: number): number {
    const batch = this.nextBatch++;
    let start = 0;
    this.shards(draws.length).forEach((count, k) => {
      this.post(this.slots[k]!, { type: 'crops', batch, draws: draws.slice(start, start + count), size });
      start += count;
    });
    return batch;
  }

  private post(slot: Slot, message: ToGradientWorker): void {
    if (slot.failure) throw slot.failure;
    slot.worker.postMessage(message);
  }

  private request(slot: Slot, batch: number): Promise<ShardResult> {
    const id = this.nextId++;
    return new Promise<ShardResult>((resolve, reject) => {
      if (slot.failure) return reject(slot.failure);
      slot.pending = { id, resolve, reject };
      this.post(slot, { type: 'step', id, batch });
    }).finally(() => {
      slot.pending = undefined;
    });
  }

  /**
   * The batch's loss and gradients: each shard's weighted by its share of the crops, summed in worker
   * order as each arrives, so that the first are added while the last still compute.
   */
  private async combine(results: Promise<ShardResult>[], sizes: number[], n: number): Promise<BatchGradients> {
    // A failure is thrown once, from the first failed worker in order; the others' are handled here.
    for (const result of results) result.catch(() => undefined);
    const shares = sizes.map((s) => s / n);
    const reached = this.lengths.map(() => false);
    let loss = 0;
    for (const [k, pending] of results.entries()) {
      const r = await pending;
      const g = this.shardGradients[k]!;
      const share = shares[k]!;
      loss += share * r.loss;
      let end = 0;
      this.lengths.forEach((length, i) => {
        const start = end;
        end += length;
        if (!r.reached[i]) return;
        const sum = this.sum.subarray(start, end);
        if (!reached[i]) sum.fill(0);
        reached[i] = true;
        for (let j = 0; j < length; j++) sum[j] += share * g[start + j]!;
      });
    }
    let end = 0;
    const grads = this.lengths.map((length, i) => {
      end += length;
      return reached[i] ? this.sum.subarray(end - length, end) : null;
    });
    return { loss, grads };
  }

  private spawn(init: GradientWorkerInit): Slot {
    return startWorker<FromGradientWorker, ShardResult>(GRADIENT_WORKER_SCRIPT, init, {
      resultType: 'gradients',
      resultOf: (m) => {
        const { loss, reached } = m as Extract<FromGradientWorker, { type: 'gradients' }>;
        return { loss, reached };
      },
      errorText: (error) => `a training worker failed: ${error.message}`,
      exitText: (code) => (this.closed ? 'the parallel trainer is closed' : `a training worker stopped (exit code ${code})`),
    });
  }
}

/** A float array in memory that worker threads share. */
function sharedFloats(length: number): Float32Array {
  return new Float32Array(new SharedArrayBuffer(length * Float32Array.BYTES_PER_ELEMENT));
}

/** `a`, or a copy of it in shared memory where it is not there yet. */
function shared(a: Float32Array): Float32Array {
  if (a.buffer instanceof SharedArrayBuffer) return a;
  const copy = sharedFloats(a.length);
  copy.set(a);
  return copy;
}

/** Moves the photos' planes and features into shared memory, replacing each array where it is kept. */
function shareInPlace(photos: PhotoPlanes[], features: PhotoFeatures[] | undefined): void {
  for (const photo of photos) {
    photo.L = shared(photo.L);
    photo.a = shared(photo.a);
    photo.b = shared(photo.b);
  }
  for (const f of features ?? []) {
    for (const side of [f.plain, f.mirrored]) {
      side.local8 = shared(side.local8);
      side.local16 = shared(side.local16);
      side.global = shared(side.global);
    }
  }
}
