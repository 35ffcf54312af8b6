/**
 * The messages between a training run and its gradient workers (plain data only). Each worker holds a
 * replica of the network; the run sends every replica the trained weights' values with each shard, so
 * all replicas compute with the very weights the run's one optimiser produced.
 */
import type { SerialisedError } from '../errors.js';
import type { BorrowedInputs } from '../model/index.js';

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
}

export type ToGradientWorker =
  /** Sets the named weights (all of them, once, before the first shard). */
  | { type: 'weights'; names: string[]; values: Float32Array[] }
  /** One shard of a batch: the trained weights' values to use, then the crops. */
  | {
      type: 'shard';
      id: number;
      values: Float32Array[];
      L: Float32Array;
      ab: Float32Array;
      n: number;
      h: number;
      w: number;
      borrowed?: BorrowedInputs;
    };

export type FromGradientWorker =
  | { type: 'ready'; backend: string }
  | { type: 'init-failed'; error: SerialisedError }
  | { type: 'gradients'; id: number; loss: number; grads: (Float32Array | null)[] }
  | { type: 'failed'; id: number; error: SerialisedError };
