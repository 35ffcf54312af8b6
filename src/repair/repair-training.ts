/**
 * Training the repair network, self-supervised: random crops of colour photographs' L*, damaged by our
 * own generator, teach it the damage mask (weighted cross-entropy: damage is rare) and the undamaged L*
 * on the damaged pixels (mean absolute error there). A tenth of the photos (seed 1, as `train` splits) is
 * held out for measuring; the model is saved every few minutes and at the end.
 */
import { readdir } from 'node:fs/promises';
import { extname, join, resolve } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import { loadPhotoSet, Random, splitHoldout, type Photo } from '../training/index.js';
import { addGrain, drawDamage } from './damage.js';
import { medianFill } from './fill.js';
import { detectionFigures, maskedSquaredError, poolDetection, psnrOf } from './measures.js';
import { createRepairNetwork, toRepairInput } from './network.js';
import { networkPlanes, networkRepair } from './network-repair.js';
import { saveRepairModel, type RepairModel, type RepairModelMeta } from './repair-model.js';

export interface RepairTrainingOptions {
  /** A folder of colour photographs (the training pool). */
  photos: string;
  /** The model folder to write. */
  out: string;
  /** Most optimiser steps. */
  steps: number;
  /** Time budget in minutes (the run stops at whichever comes first). */
  minutes?: number;
  seed?: number;
  /** Crop side in pixels (a multiple of 4). Default 96. */
  crop?: number;
  /** Crops per step. Default 8. */
  batch?: number;
  /** Adam's learning rate. Default 2e-3. */
  learningRate?: number;
  /** Minutes between saves. Default 5. */
  saveMinutes?: number;
  /** Long side the photos are read at. Default 1024. */
  maxSide?: number;
  /** Stops after the current step. */
  signal?: AbortSignal;
}

export type RepairTrainingEvent =
  | { type: 'photos'; train: number; holdout: number }
  | { type: 'step'; step: number; loss: number; maskLoss: number; fillLoss: number; seconds: number }
  | { type: 'saved'; step: number; dir: string };

const IMAGE = new Set(['.jpg', '.jpeg', '.png', '.tif', '.tiff', '.webp', '.gif', '.avif']);

/** Damage elements per megapixel on training crops: several per crop, so every step sees damage. */
const TRAINING_DAMAGE = 700;

/**
 * The photos of a pool folder split as the repair model's training and benchmark use them.
 * @example
 *   const { train, holdout } = await repairPhotoSplit('.data/pool');
 */
export async function repairPhotoSplit(folder: string): Promise<{ train: string[]; holdout: string[] }> {
  const abs = resolve(folder);
  const names = (await readdir(abs)).filter((n) => IMAGE.has(extname(n).toLowerCase())).sort();
  const split = splitHoldout(
    names.map((n) => ({ file: join(abs, n) })),
    0.1,
    1,
  );
  return { train: split.train.map((f) => f.file), holdout: split.holdout.map((f) => f.file) };
}

/** Reads photos as L* planes at `maxSide` (colour and grey alike: repair needs only lightness). */
export async function readRepairPhotos(files: string[], maxSide: number): Promise<Photo[]> {
  const set = await loadPhotoSet(files, { maxSide, seed: 1, holdout: 0 });
  return [...set.train, ...set.holdout];
}

/**
 * Trains a repair network and writes it to `options.out`.
 * @example
 *   await trainRepairModel({ photos: '.data/pool', out: 'models/kinhue-repair', steps: 2000, minutes: 60 }, console.log);
 */
export async function trainRepairModel(
  options: RepairTrainingOptions,
  onEvent: (event: RepairTrainingEvent) => void = () => {},
): Promise<{ steps: number; seconds: number; meta: RepairModelMeta }> {
  const seed = options.seed ?? 1;
  const crop = options.crop ?? 96;
  const batch = options.batch ?? 8;
  const split = await repairPhotoSplit(options.photos);
  const photos = (await readRepairPhotos(split.train, options.maxSide ?? 1024)).filter((p) => p.width >= crop && p.height >= crop);
  onEvent({ type: 'photos', train: photos.length, holdout: split.holdout.length });
  const rng = new Random(seed);
  const network = createRepairNetwork(seed);
  const optimiser = tf.train.adam(options.learningRate ?? 2e-3);
  const started = performance.now();
  let lastSave = started;
  const budget = (options.minutes ?? Infinity) * 60_000;
  const record = (step: number) => ({
    photos: photos.length,
    heldOut: split.holdout.length,
    steps: step,
    crop,
    batch,
    seed,
    learningRate: options.learningRate ?? 2e-3,
    damagePerMegapixel: TRAINING_DAMAGE,
    minutes: Number(((performance.now() - started) / 60_000).toFixed(1)),
  });
  const save = async (step: number): Promise<RepairModelMeta> => {
    const meta = await saveRepairModel(network, options.out, {
      name: 'kinhue-repair',
      threshold: 0.5,
      fill: 'network',
      detection: 'network',
      training: record(step),
    });
    onEvent({ type: 'saved', step, dir: options.out });
    lastSave = performance.now();
    return meta;
  };
  let step = 0;
  const n = crop * crop;
  while (step < options.steps && performance.now() - started < budget && !options.signal?.aborted) {
    const input = new Float32Array(batch * n);
    const clean = new Float32Array(batch * n);
    const mask = new Float32Array(batch * n);
    for (let k = 0; k < batch; k++) {
      const photo = photos[rng.int(photos.length)]!;
      const plane = cropOf(photo, crop, rng);
      const d = drawDamage(plane, crop, crop, rng, { perMegapixel: TRAINING_DAMAGE });
      for (let i = 0; i < n; i++) {
        input[k * n + i] = toRepairInput(d.L[i]!);
        clean[k * n + i] = toRepairInput(d.clean[i]!);
        mask[k * n + i] = d.mask[i]!;
      }
    }
    const losses = tf.tidy(() => {
      const x = tf.tensor4d(input, [batch, crop, crop, 1]);
      const y = tf.tensor4d(clean, [batch, crop, crop, 1]);
      const m = tf.tensor4d(mask, [batch, crop, crop, 1]);
      let maskPart: tf.Scalar | undefined;
      let fillPart: tf.Scalar | undefined;
      const total = optimiser.minimize(() => {
        const out = network.apply(x, { training: true }) as tf.Tensor4D;
        const logit = out.slice([0, 0, 0, 0], [-1, -1, -1, 1]);
        const fix = out.slice([0, 0, 0, 1], [-1, -1, -1, 1]);
        // Damage is a few percent of pixels: weigh it 4 times (kinhue's own choice).
        maskPart = tf.keep(tf.losses.sigmoidCrossEntropy(m, logit, m.mul(3).add(1)) as tf.Scalar);
        fillPart = tf.keep(x.add(fix).sub(y).abs().mul(m).sum().div(m.sum().add(1)) as tf.Scalar);
        return maskPart.add(fillPart.mul(10)) as tf.Scalar;
      }, true) as tf.Scalar;
      const values = [total.dataSync()[0]!, maskPart!.dataSync()[0]!, fillPart!.dataSync()[0]!];
      tf.dispose([maskPart!, fillPart!]);
      return values;
    });
    step++;
    onEvent({
      type: 'step',
      step,
      loss: losses[0]!,
      maskLoss: losses[1]!,
      fillLoss: losses[2]!,
      seconds: (performance.now() - started) / 1000,
    });
    if (performance.now() - lastSave > (options.saveMinutes ?? 5) * 60_000) await save(step);
  }
  const chosen = chooseRepairSettings(
    { network, meta: { ...placeholderMeta, training: {} }, dir: options.out },
    photos.slice(-VALIDATION_PHOTOS),
    seed,
  );
  const meta = await saveRepairModel(network, options.out, {
    name: 'kinhue-repair',
    ...chosen.settings,
    training: { ...record(step), choice: chosen.figures },
  });
  onEvent({ type: 'saved', step, dir: options.out });
  return { steps: step, seconds: (performance.now() - started) / 1000, meta };
}

/** Photos of the training part on which detection and fill are chosen at the end of a run. */
export const VALIDATION_PHOTOS = 12;

const placeholderMeta: RepairModelMeta = {
  format: 'kinhue-repair',
  version: 1,
  name: 'kinhue-repair',
  weightsSha256: '',
  topologySha256: '',
  threshold: 0.5,
  fill: 'network',
  detection: 'network',
  training: {},
};

/** Detection modes and thresholds tried when a run ends. */
const CHOICES: Array<Pick<RepairModelMeta, 'detection' | 'threshold'>> = [
  { detection: 'network', threshold: 0.5 },
  { detection: 'network', threshold: 0.7 },
  { detection: 'network', threshold: 0.85 },
  { detection: 'confirmed', threshold: 0.3 },
  { detection: 'confirmed', threshold: 0.5 },
  { detection: 'confirmed', threshold: 0.7 },
];

/**
 * Chooses how the network is used, on photos damaged with a fixed seed: the detection mode and threshold
 * with the best F1 of precision and recall less 10 times the share of pixels changed on the same photos
 * undamaged and grainy (kinhue's own weighing: one percent of a clean scan changed costs 0.1 of F1), and
 * the fill (network or median) with the higher PSNR on the true mask.
 */
export function chooseRepairSettings(
  model: RepairModel,
  photos: Photo[],
  seed: number,
): {
  settings: Pick<RepairModelMeta, 'detection' | 'threshold' | 'fill'>;
  figures: Record<string, number | string>;
} {
  const rng = new Random(seed + 1000);
  const cases = photos.map((p) => {
    const damaged = drawDamage(p.L, p.width, p.height, rng);
    const clean = Float32Array.from(p.L);
    addGrain(clean, rng, 1.5);
    return { p, damaged, clean };
  });
  let best: { score: number; choice: (typeof CHOICES)[number]; f1: number; changed: number } | undefined;
  for (const choice of CHOICES) {
    const found = cases.map(({ p, damaged }) =>
      detectionFigures(networkRepair(damaged.L, p.width, p.height, model, choice).mask, damaged.mask, p.width, p.height, 2),
    );
    const pooled = poolDetection(found);
    const f1 = pooled.precision + pooled.recall > 0 ? (2 * pooled.precision * pooled.recall) / (pooled.precision + pooled.recall) : 0;
    let changed = 0;
    for (const { p, clean } of cases)
      changed += networkRepair(clean, p.width, p.height, model, choice).mask.reduce((s, m) => s + m, 0) / (p.width * p.height);
    changed /= cases.length;
    const score = f1 - 10 * changed;
    if (!best || score > best.score) best = { score, choice, f1, changed };
  }
  let net = { sum: 0, count: 0 };
  let median = { sum: 0, count: 0 };
  for (const { p, damaged } of cases) {
    const a = maskedSquaredError(networkPlanes(damaged.L, p.width, p.height, model).lightness, damaged.clean, damaged.mask);
    const b = maskedSquaredError(medianFill(damaged.L, p.width, p.height, damaged.mask), damaged.clean, damaged.mask);
    net = { sum: net.sum + a.sum, count: net.count + a.count };
    median = { sum: median.sum + b.sum, count: median.count + b.count };
  }
  const fill = psnrOf(net) >= psnrOf(median) ? 'network' : 'median';
  return {
    settings: { ...best!.choice, fill },
    figures: {
      photos: photos.length,
      f1: round(best!.f1),
      changedShare: round(best!.changed),
      networkFillPsnr: round(psnrOf(net)),
      medianFillPsnr: round(psnrOf(median)),
    },
  };
}

function round(v: number): number {
  return Math.round(v * 10000) / 10000;
}

/** A random square crop of a photo's L*, mirrored half the time. */
function cropOf(photo: Photo, size: number, rng: Random): Float32Array {
  const x0 = rng.int(photo.width - size + 1);
  const y0 = rng.int(photo.height - size + 1);
  const flip = rng.next() < 0.5;
  const out = new Float32Array(size * size);
  for (let y = 0; y < size; y++) {
    for (let x = 0; x < size; x++) out[y * size + x] = photo.L[(y0 + y) * photo.width + x0 + (flip ? size - 1 - x : x)]!;
  }
  return out;
}
