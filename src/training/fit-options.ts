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
  /** Fraction of the photos held out to report on, never used to choose anything. Default 0.1 (at least 2 photos). */
  holdout?: number;
  /**
   * Fraction of the photos set aside to choose the step kept and when to stop (validation), apart from the
   * held-out ones. Default 0.1 (at least 2 photos).
   */
  validation?: number;
  /**
   * Optimiser learning rate. Default 1e-3 for train, 1e-4 for tune. Given with `resume`, it replaces the
   * checkpoint's from the next step on (a step-down schedule); the change is recorded.
   */
  learningRate?: number;
  /**
   * Class rebalancing lambda of Zhang et al. (2016): 0.5 (the paper's) favours vivid, rarer colours;
   * towards 1 the weights even out and colours grow more cautious. Default for train 0.5; for tune the
   * starting model's own class weights (and so its decoding) are kept, and a value given here replaces
   * them with weights from the tuning photos.
   */
  rebalance?: number;
  /** Keep the encoder's weights fixed (tune). */
  freezeEncoder?: boolean;
  /** Continue the run whose checkpoint is in `out`. */
  resume?: boolean;
  /** Evaluate on the validation photos every this many steps. Default 100 for train, 50 for tune. */
  evalEvery?: number;
  /**
   * Stop once this many evaluations in a row bring no improvement on the validation photos (0: never).
   * Default 0 for train, 5 for tune.
   */
  patience?: number;
  /** Keep the checkpoint in a finished folder (to continue later with a larger budget). Default false. */
  keepCheckpoint?: boolean;
  /** Minutes between checkpoints. Default 5. */
  checkpointMinutes?: number;
  /** Long side, in pixels, photos are kept and evaluated at. Default the model's working size (512) or 3 x crop if larger. */
  photoSize?: number;
  /** Which model to keep in `out`: the last, or the best by validation CIEDE2000. Default: last for train, best for tune. */
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
  /**
   * Keep a running average of the weights over about this many steps and evaluate and save it instead of
   * the last weights (weight-average.ts); 0: none. Default 0.
   */
  averageOver?: number;
  /** Stops the run cleanly (a checkpoint is written) after the current step. */
  signal?: AbortSignal;
}

/** A validation evaluation's figures that choose the step (evaluation.ts' choiceScore) and the step it was made at. */
export interface BestSoFar {
  step: number;
  ciede2000: number;
  /** Null when no validation photo has clearly coloured pixels. */
  rightHue: number | null;
}

/** What the loop reports while it runs. */
export type FitEvent =
  | { type: 'reading'; done: number; total: number; file: string }
  | { type: 'features'; done: number; total: number }
  | {
      type: 'data';
      train: number;
      validation: number;
      holdout: number;
      grey: number;
      unreadable: { file: string; reason: string }[];
      otherFiles: number;
    }
  | { type: 'resumed'; step: number; seconds: number }
  /** How many worker threads compute the steps; `previous` when a resumed run changes the checkpoint's number. */
  | { type: 'workers'; workers: number; step: number; previous?: number }
  /** Figures of the starting weights: `validation` chooses the steps, `heldOut` is only reported. */
  | { type: 'baseline'; validation: { grey: Evaluation; start: Evaluation }; heldOut: { grey: Evaluation; start: Evaluation } }
  | { type: 'step'; step: number; loss: number; seconds: number; secondsLeft: number; fraction: number; last?: BestSoFar; best?: BestSoFar }
  | { type: 'evaluation'; step: number; loss: number | null; evaluation: Evaluation; best: boolean; bestSoFar: BestSoFar }
  /** Early stopping: `patience` evaluations in a row without improvement since `bestStep`. */
  | { type: 'stalled'; step: number; bestStep: number; ciede2000: number; rightHue: number | null; patience: number }
  | { type: 'checkpoint'; step: number; file: string }
  | { type: 'model'; step: number; dir: string }
  /** Something to tell the user, e.g. that the starting model's layout could not be checked. */
  | { type: 'note'; message: string };

/** Why a run stopped. `no-improvement`: early stopping (see FitOptions.patience). */
export type StoppedBy = 'steps' | 'time' | 'no-improvement' | 'interrupted';

/** The outcome of a run, also written to `training-summary.json` and the model's metadata. */
export interface FitResult {
  mode: FitMode;
  /** The model folder (as given; the files written record only its name). */
  out: string;
  /** Optimiser steps taken (over all sessions). */
  steps: number;
  /** Crops seen: steps x batch. */
  crops: number;
  /** Training seconds over all sessions. */
  seconds: number;
  /** Why the run stopped. */
  stoppedBy: StoppedBy;
  /** Whether the checkpoint was left in the folder (interrupted runs, or asked with keepCheckpoint). */
  checkpointKept: boolean;
  photos: { train: number; validation: number; holdout: number; grey: number; unreadable: number };
  /**
   * Figures on the validation photos, which chose the step kept (`photos` 0 and figures copied from
   * `heldOut` in runs from before the validation split, which chose on the held-out photos).
   */
  validation: { grey: Evaluation; before: Evaluation; best: Evaluation; bestStep: number };
  /** Held-out figures, never used to choose: the grey baseline, the model before training, and the model kept in `out`. */
  heldOut: { grey: Evaluation; before: Evaluation; after: Evaluation; keptStep: number };
  /** The held-out photos (paths as found on this machine; not written to any file). */
  holdoutFiles: string[];
  /** The model tuned from: its name and weights' SHA-256 (tune only). */
  from?: { name: string; weightsSha256: string };
  options: {
    batch: number;
    crop: number;
    seed: number;
    holdout: number;
    /** Fraction set aside for validation (0 in runs from before the split: they chose on the held-out photos). */
    validation?: number;
    learningRate: number;
    /** Learning rates set on resume, and the step from which each applied. */
    learningRateChanges?: { step: number; learningRate: number }[];
    rebalance: number;
    /** Where the class weights come from: the starting model's (tune, by default) or the training photos. */
    classWeightsFrom?: 'base' | 'photos';
    freezeEncoder: boolean;
    keep: 'last' | 'best';
    /** Evaluations without improvement before stopping (0 or absent: never). */
    patience?: number;
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
    /** Steps the saved weights are averaged over (absent or 0: the weights of one step). */
    averageOver?: number;
  };
}

/** The summary file written beside the model. */
export const SUMMARY_FILE = 'training-summary.json';

/** The settings a run is made with; a resumed run keeps those of its checkpoint. */
export type FitSettings = FitResult['options'];

/** Whether a run chooses anything on its evaluations: the step kept (keep best) or when to stop (patience). */
export function choosesStep(settings: Pick<FitSettings, 'keep' | 'patience'>): boolean {
  return settings.keep === 'best' || Boolean(settings.patience);
}

/** A value the command line can give. */
type OptionValue = number | boolean | string;

/**
 * One option of `train` and `tune`: the FitOptions field it sets (its command-line name is the field's
 * name in kebab case, `learningRate` -> `--learning-rate`), the verbs that take it, its default per verb (what fit applies when it is not given) and what a valid value
 * is. The yargs tables, their checks and the defaults fit applies all read this one list.
 */
export interface FitOptionSpec {
  key: keyof FitOptions;
  type: 'number' | 'boolean' | 'string';
  verbs: readonly FitMode[];
  describe: string;
  /** The default per verb; absent: none (or one described in `describe`). */
  defaults?: Partial<Record<FitMode, OptionValue>>;
  /** What a valid value is, for the message ("--crop must be <rule>, got 100"), and the test. */
  rule?: string;
  valid?: (value: number) => boolean;
}

const BOTH: readonly FitMode[] = ['train', 'tune'];
const whole = (min: number) => (v: number) => Number.isInteger(v) && v >= min;
/** A share of the photos set aside: enough left to learn from. */
const FRACTION = { rule: 'a fraction above 0 and at most 0.5', valid: (v: number) => v > 0 && v <= 0.5 } as const;

/** The options `train` and `tune` share with the fit loop, in the order `--help` lists them. */
export const FIT_OPTIONS: readonly FitOptionSpec[] = [
  { key: 'out', type: 'string', verbs: BOTH, describe: 'model folder to write (created if missing; one of its own)' },
  { key: 'from', type: 'string', verbs: ['tune'], describe: 'model folder to start from (default: the shipped model)' },
  {
    key: 'hours',
    type: 'number',
    verbs: BOTH,
    describe: 'time budget in hours (all resumed sessions together)',
    rule: 'above 0',
    valid: (v) => v > 0,
  },
  {
    key: 'steps',
    type: 'number',
    verbs: BOTH,
    describe: 'step budget (all resumed sessions together)',
    rule: 'a whole number of at least 1',
    valid: whole(1),
  },
  {
    key: 'batch',
    type: 'number',
    verbs: BOTH,
    describe: 'crops per step',
    defaults: { train: 16, tune: 16 },
    rule: 'a whole number from 1 to 256',
    valid: (v) => whole(1)(v) && v <= 256,
  },
  {
    key: 'crop',
    type: 'number',
    verbs: BOTH,
    describe: 'crop side in pixels, a multiple of 16',
    defaults: { train: 128, tune: 128 },
    rule: 'a multiple of 16 from 32 to 512',
    valid: (v) => whole(32)(v) && v <= 512 && v % 16 === 0,
  },
  {
    key: 'seed',
    type: 'number',
    verbs: BOTH,
    describe: 'seed of every random choice (same seed, same model)',
    defaults: { train: 1, tune: 1 },
    rule: 'a whole number of 0 or more',
    valid: whole(0),
  },
  {
    key: 'holdout',
    type: 'number',
    verbs: BOTH,
    describe: 'fraction of the photos held out to report on, never to choose (at least 2 photos)',
    defaults: { train: 0.1, tune: 0.1 },
    ...FRACTION,
  },
  {
    key: 'validation',
    type: 'number',
    verbs: BOTH,
    describe:
      'fraction of the photos that choose the step kept and when to stop (at least 2 photos); 0 sets none aside, for a train run that keeps its last step and never stops early',
    defaults: { train: 0.1, tune: 0.1 },
    rule: `0 or ${FRACTION.rule}`,
    valid: (v) => v === 0 || FRACTION.valid(v),
  },
  {
    key: 'learningRate',
    type: 'number',
    verbs: BOTH,
    describe: 'optimiser learning rate; with --resume it applies from the next step',
    defaults: { train: 1e-3, tune: 1e-4 },
    rule: 'between 0 and 1',
    valid: (v) => v > 0 && v < 1,
  },
  {
    key: 'rebalance',
    type: 'number',
    verbs: BOTH,
    defaults: { train: 0.5 },
    rule: 'above 0 and at most 1',
    valid: (v) => v > 0 && v <= 1,
    describe:
      "class rebalancing lambda, 0-1: 0.5 favours vivid colours, higher is more cautious (tune: default the starting model's own weights and decoding)",
  },
  {
    key: 'freezeEncoder',
    type: 'boolean',
    verbs: ['tune'],
    describe: 'keep the encoder fixed; learn only the decoder (small archives)',
    defaults: { tune: false },
  },
  {
    key: 'evalEvery',
    type: 'number',
    verbs: BOTH,
    describe: 'evaluate on the validation photos every this many steps',
    defaults: { train: 100, tune: 50 },
    rule: 'a whole number of at least 1',
    valid: whole(1),
  },
  {
    key: 'patience',
    type: 'number',
    verbs: BOTH,
    describe: 'stop after this many evaluations in a row without improvement (0: never)',
    defaults: { train: 0, tune: 5 },
    rule: 'a whole number of 0 or more',
    valid: whole(0),
  },
  {
    key: 'resume',
    type: 'boolean',
    verbs: BOTH,
    describe: 'continue the run whose checkpoint is in --out',
    defaults: { train: false, tune: false },
  },
  {
    key: 'checkpointMinutes',
    type: 'number',
    verbs: BOTH,
    describe: 'minutes between checkpoints',
    defaults: { train: 5, tune: 5 },
    rule: 'above 0',
    valid: (v) => v > 0,
  },
  {
    key: 'keepCheckpoint',
    type: 'boolean',
    verbs: BOTH,
    describe: 'leave the checkpoint in a finished folder, to continue later with a larger budget',
    defaults: { train: false, tune: false },
  },
  {
    key: 'averageOver',
    type: 'number',
    verbs: BOTH,
    describe: 'evaluate and save a running average of the weights over about this many steps (0: the last weights)',
    defaults: { train: 0, tune: 0 },
    rule: '0 or a whole number of at least 2',
    valid: (v) => v === 0 || whole(2)(v),
  },
  {
    key: 'workers',
    type: 'number',
    verbs: BOTH,
    rule: 'a whole number of at least 1',
    valid: whole(1),
    describe:
      "worker threads computing each step, each on its share of the crops (default: one per core; on --resume the run's own; 1 = one thread)",
  },
];

/**
 * The default fit applies for an option of a verb.
 * @example
 *   fitDefault('learningRate', 'tune'); // 1e-4
 */
export function fitDefault<T extends OptionValue>(key: keyof FitOptions, mode: FitMode): T | undefined {
  return FIT_OPTIONS.find((o) => o.key === key)?.defaults?.[mode] as T | undefined;
}

/**
 * Fills in the defaults of {@link FIT_OPTIONS}: 16 crops of 128 px a step, seed 1, 10 percent held out and
 * 10 percent for validation, learning rate 1e-3 for train and a tenth of that for tune (common practice for
 * fine-tuning), photos kept at the model's working size so crops show things at the scale restore sees
 * them. `baseRebalance` is the starting model's recorded lambda (tune).
 * @example
 *   resolveSettings({ photos: ['p/'], out: 'm', steps: 10 }, 'train', true).batch; // 16
 */
export function resolveSettings(options: FitOptions, mode: FitMode, backbone: boolean, baseRebalance?: number): FitSettings {
  const pick = <T extends OptionValue>(key: keyof FitOptions): T => (options[key] as T | undefined) ?? fitDefault<T>(key, mode)!;
  const crop = pick<number>('crop');
  const inherit = mode === 'tune' && options.rebalance === undefined;
  return {
    batch: pick<number>('batch'),
    crop,
    seed: pick<number>('seed'),
    holdout: pick<number>('holdout'),
    validation: pick<number>('validation'),
    learningRate: pick<number>('learningRate'),
    rebalance: options.rebalance ?? (inherit ? baseRebalance : undefined) ?? REBALANCE_LAMBDA,
    classWeightsFrom: inherit ? 'base' : 'photos',
    freezeEncoder: options.freezeEncoder ?? false,
    keep: options.keep ?? (mode === 'tune' ? 'best' : 'last'),
    patience: pick<number>('patience'),
    averageOver: pick<number>('averageOver'),
    photoSize: options.photoSize ?? (backbone ? BACKBONE_PHOTO_SIZE : Math.max(DEFAULT_WORKING_SIZE, crop * 3)),
    backbone,
  };
}
