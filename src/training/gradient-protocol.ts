/**
 * The messages between a training run and its gradient workers (plain data only). The bulk travels
 * through shared memory, not messages: the training photos (and their backbone features), the trained
 * weights' values, written by the run's one optimiser before each step, and each worker's gradients.
 * A worker cuts its own crops from the shared photos, as the run drew them.
 */
import type { SerialisedError } from '../errors.js';
import type { CropDraw, PhotoFeatures, PhotoPlanes } from './crop-sampler.js';

/** What a worker starts with. */
export interface GradientWorkerInit {
  /** The network's layers topology (LayersModel.toJSON), the same architecture as the run's network. */
  topology: Record<string, unknown>;
  /** Names of the trained weights, in the order of values and gradients. */
  names: string[];
  /** Rebalancing weight per bin. */
  classWeights: Float32Array;
  /** The TensorFlow.js backend the run uses; the worker must run the same one for identical figures. */
  backend: string;
  /** The photos crops are cut from, and per photo its backbone features (both ways round), all shared. */
  photos: PhotoPlanes[];
  features?: PhotoFeatures[];
  /** The trained weights' values, one after another in `names` order (shared, written by the run). */
  values: Float32Array;
  /** This worker's gradients, laid out as `values` (shared, written by the worker). */
  gradients: Float32Array;
}

export type ToGradientWorker =
  /** Sets the named weights (all of them, once, before the first step). */
  | { type: 'weights'; names: string[]; values: Float32Array[] }
  /** Cut these crops (this worker's shard of a batch) now, for the step that names `batch`. */
  | { type: 'crops'; batch: number; draws: CropDraw[]; size: number }
  /** Compute the gradients of the crops cut for `batch`, with the values now in shared memory. */
  | { type: 'step'; id: number; batch: number };

export type FromGradientWorker =
  | { type: 'ready'; backend: string }
  | { type: 'init-failed'; error: SerialisedError }
  /** The gradients are in shared memory; `reached` says, per weight, whether the loss reaches it. */
  | { type: 'gradients'; id: number; loss: number; reached: boolean[] }
  | { type: 'failed'; id: number; error: SerialisedError };
