/**
 * The options, progress events and result of a training run ({@link fit}), and how the options
 * resolve to the settings a run records and keeps when resumed.
 */
import { DEFAULT_WORKING_SIZE, REBALANCE_LAMBDA, type NetworkOptions } from '../model/index.js';

/** Long side of the photos a network with a backbone learns from, and of the pictures it colours: whole scenes, small. */
export const BACKBONE_PHOTO_SIZE = 320;
import type { Evaluation } from './evaluation.js';

export type FitMode = 'train' | 'tune';

export interface FitOptions {
  /** Photo files and folders (searched recursively). */
  photos: string[];
  /** The model folder to write (created if missing). */
  out: string;
  /** 'train' starts from a new network, 'tune' from an existing model. Default 'train'. */
  mode?: FitMode;
  /** The model to tune (required for mode 'tune'). */
  from?: string;
  /** Time budget in hours (training time over all resumed sessions). */
  hours?: number;
  /** Step budget (total, over all resumed sessions). */
  steps?: number;
  /** Crops per step. Default 16. */
  batch?: number;
  /** Crop side in pixels, a multiple of 16 (the network's). Default 128. */
  crop?: number;
  /** Seed of every random choice. Default 1. */
  seed?: number;
  /** Fraction of the photos held out for evaluation. Default 0.1 (at least 2 photos). */
  holdout?: number;
  /**
   * Optimiser learning rate. Default 1e-3 for train, 1e-4 for tune. Given with `resume`, it replaces the
   * checkpoint's from the next step on (a step-down schedule); the change is recorded.
   */
  learningRate?: number;
  /**
   * Class rebalancing lambda of Zhang et al. (2016): 0.5 (the paper's) favours vivid, rarer colours;
   * towards 1 the weights even out and colours grow more cautious. Default 0.5.
   */
  rebalance?: number;
  /** Keep the encoder's weights fixed (tune). */
  freezeEncoder?: boolean;
  /** Continue the run whose checkpoint is in `out`. */
  resume?: boolean;
  /** Evaluate on the held-out photos every this many steps. Default 100. */
  evalEvery?: number;
  /** Minutes between checkpoints. Default 5. */
  checkpointMinutes?: number;
  /** Long side, in pixels, photos are kept and evaluated at. Default the model's working size (512) or 3 x crop if larger. */
  photoSize?: number;
  /** Which model to keep in `out`: the last, or the best by held-out CIEDE2000. Default: last for train, best for tune. */
  keep?: 'last' | 'best';
  /** Size of a new network (train only). */
  network?: NetworkOptions;
  /**
   * A model folder whose backbone a new network reads (train only; see model/backbone.ts), or false for
   * a network of L* alone. Default: the shipped model's backbone.
   */
  backbone?: string | false;
  /** Evaluate (and save the model) with annealed-mean decoding at this temperature. Default: the model's decoding. */
  temperature?: number;
  /**
   * Worker threads that compute each step's gradients, each on its share of the crops (1: the run's own
   * thread). Default: one per core for a new run (at most one per crop), the checkpoint's number on resume.
   * Given with `resume` and different from the checkpoint's, it applies from the next step and is recorded.
   */
  workers?: number;
  /** Stops the run cleanly (a checkpoint is written) after the current step. */
  signal?: AbortSignal;
}

/** What the loop reports while it runs. */
export type FitEvent =
  | { type: 'reading'; done: number; total: number; file: string }
  | { type: 'features'; done: number; total: number }
  | { type: 'data'; train: number; holdout: number; grey: number; unreadable: { file: string; reason: string }[]; otherFiles: number }
  | { type: 'resumed'; step: number; seconds: number }
  /** How many worker threads compute the steps; `previous` when a resumed run changes the checkpoint's number. */
  | { type: 'workers'; workers: number; step: number; previous?: number }
  | { type: 'baseline'; grey: Evaluation; start: Evaluation }
  | { type: 'step'; step: number; loss: number; seconds: number; secondsLeft: number; fraction: number; heldOut?: number }
  | { type: 'evaluation'; step: number; loss: number; evaluation: Evaluation; best: boolean }
  | { type: 'checkpoint'; step: number; file: string }
  | { type: 'model'; step: number; dir: string }
  /** Something to tell the user, e.g. that the starting model's layout could not be checked. */
  | { type: 'note'; message: string };

/** The outcome of a run, also written to `training-summary.json` and the model's metadata. */
export interface FitResult {
  mode: FitMode;
  out: string;
  /** Total optimiser steps (over all sessions). */
  steps: number;
  /** Crops seen: steps x batch. */
  crops: number;
  /** Training seconds over all sessions. */
  seconds: number;
  /** Why the run stopped. */
  stoppedBy: 'steps' | 'time' | 'interrupted';
  photos: { train: number; holdout: number; grey: number; unreadable: number };
  /** Held-out figures: the grey baseline, the model before training, and the model kept in `out`. */
  heldOut: { grey: Evaluation; before: Evaluation; after: Evaluation; keptStep: number };
  options: {
    batch: number;
    crop: number;
    seed: number;
    holdout: number;
    learningRate: number;
    /** Learning rates set on resume, and the step from which each applied. */
    learningRateChanges?: { step: number; learningRate: number }[];
    rebalance: number;
    freezeEncoder: boolean;
    keep: 'last' | 'best';
    photoSize: number;
    /** The network reads a backbone's features (absent in runs from before backbones: false). */
    backbone?: boolean;
    /** Worker threads computing each step (absent in runs from before workers: 1). */
    workers?: number;
    /**
     * Numbers of workers set on resume (with the number before), and the step from which each applied:
     * from there on the weights differ (by float rounding, then more) from those of a run never stopped.
     */
    workerChanges?: { step: number; previous: number; workers: number }[];
  };
}

/** The summary file written beside the model. */
export const SUMMARY_FILE = 'training-summary.json';

/** The settings a run is made with; a resumed run keeps those of its checkpoint. */
export type FitSettings = FitResult['options'];

/**
 * Fills in the defaults: 16 crops of 128 px a step, seed 1, 10 percent held out, learning rate 1e-3
 * for train and a tenth of that for tune (common practice for fine-tuning), photos kept at the model's
 * working size so crops show things at the scale restore sees them.
 * @example
 *   resolveSettings({ photos: ['p/'], out: 'm', steps: 10 }, 'train').batch; // 16
 */
export function resolveSettings(options: FitOptions, mode: FitMode, backbone: boolean): FitSettings {
  const crop = options.crop ?? 128;
  return {
    batch: options.batch ?? 16,
    crop,
    seed: options.seed ?? 1,
    holdout: options.holdout ?? 0.1,
    learningRate: options.learningRate ?? (mode === 'tune' ? 1e-4 : 1e-3),
    rebalance: options.rebalance ?? REBALANCE_LAMBDA,
    freezeEncoder: options.freezeEncoder ?? false,
    keep: options.keep ?? (mode === 'tune' ? 'best' : 'last'),
    photoSize: options.photoSize ?? (backbone ? BACKBONE_PHOTO_SIZE : Math.max(DEFAULT_WORKING_SIZE, crop * 3)),
    backbone,
  };
}
