/**
 * The fit loop behind `kinhue train` and `kinhue tune`: read the photos, draw batches of crops,
 * take optimiser steps within a step and/or time budget, evaluate on the held-out photos every so
 * often, write checkpoints atomically, and save the model (the last one for train, the best by
 * held-out error for tune). A resumed run continues from its checkpoint and reaches the same weights
 * as an uninterrupted one with the same seed.
 */
import { mkdir, readdir, stat } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import { ErrorCodes, KinhueError, UsageError } from '../errors.js';
import { checkFolderFiles, InputGuard, inputInside, OutputOnInputError } from '../files/index.js';
import { writeFileAtomic } from '../files/index.js';
import {
  chooseDecoding,
  DEFAULT_DECODING,
  DEFAULT_TEMPERATURE,
  REBALANCE_LAMBDA,
  abBins,
  backboneFeatures,
  binHistogram,
  DEFAULT_MODEL_DIR,
  DEFAULT_POOLING,
  loadBackbone,
  type Backbone,
  type BackboneFeatures,
  createNetwork,
  createTrainer,
  freezeEncoder,
  initBackend,
  loadModel,
  predict,
  rebalanceWeights,
  saveModel,
  tidyModelFolder,
  type ModelMetadataInput,
  type TrainerState,
} from '../model/index.js';
import { VERSION } from '../version.js';
import { CHECKPOINT_FILE, loadCheckpoint, saveCheckpoint } from './checkpoint.js';
import { type CropBatch, CropSampler, type PhotoFeatures, type SamplerState } from './crop-sampler.js';
import { evaluatePhotos, type Evaluation } from './evaluation.js';
import { SUMMARY_FILE, resolveSettings, type FitEvent, type FitMode, type FitOptions, type FitResult, type FitSettings } from './fit-options.js';
import { defaultWorkers, ParallelTrainer } from './parallel-trainer.js';
import { loadPhotoSet, type Photo, type PhotoSet } from './photo-set.js';
import { Random, type RandomState } from './random.js';
import { appendTrainingLog, truncateTrainingLog } from './training-log.js';

interface CheckpointState {
  kind: 'kinhue-training-checkpoint';
  version: string;
  mode: FitMode;
  step: number;
  seconds: number;
  lossSum: number;
  lossCount: number;
  rng: RandomState;
  sampler: SamplerState;
  options: FitSettings;
  trainFiles: string[];
  holdoutFiles: string[];
  best: { step: number; evaluation: Evaluation } | null;
  grey: Evaluation;
  before: Evaluation;
  weights: Float32Array[];
  trainer: unknown;
}

/**
 * Trains (or tunes) a model on colour photos.
 * @example
 *   const result = await fit({ photos: ['album/'], out: 'models/mine', mode: 'tune', from: 'models/kinhue-base', hours: 1 },
 *     (e) => { if (e.type === 'evaluation') console.log(e.step, e.evaluation.ciede2000); });
 *   console.log(result.heldOut.before.ciede2000, '->', result.heldOut.after.ciede2000);
 */
export async function fit(options: FitOptions, onEvent: (event: FitEvent) => void = () => {}): Promise<FitResult> {
  const mode = options.mode ?? 'train';
  const out = resolve(options.out);
  // The model folder is written as a whole: it must not be, or hold, a photo folder or the model tuned from.
  const outHint = 'choose a new --out folder for the model, outside the photo folders and the model it starts from';
  const heldInput = await inputInside(out, [...options.photos, ...(mode === 'tune' && options.from ? [options.from] : [])]);
  if (heldInput !== undefined) {
    throw new OutputOnInputError(out, heldInput, outHint, `the model folder is, or holds, the input ${heldInput} (perhaps through a link); writing the model there would change it`);
  }
  const checkpointFile = join(out, CHECKPOINT_FILE);
  const saved = options.resume ? ((await loadCheckpoint(checkpointFile)) as unknown as CheckpointState) : undefined;
  if (saved && saved.kind !== 'kinhue-training-checkpoint') {
    throw new KinhueError(ErrorCodes.BAD_DATA, 'not a kinhue training checkpoint', { file: checkpointFile, hint: 'run without --resume to start again.' });
  }
  if (!options.resume && (await exists(checkpointFile))) {
    throw new UsageError(
      `${out} holds an unfinished or finished training run (${CHECKPOINT_FILE})`,
      'add --resume to continue it, or choose another --out folder.',
    );
  }
  if (mode === 'tune' && !options.from) throw new UsageError('tune needs a model to start from', 'pass --from <model folder>.');

  // The checkpoint's settings win on resume: the same run must continue.
  // (Checkpoints written before the rebalancing option existed used the paper's 0.5.)
  const start = mode === 'tune' ? await loadModel(options.from!) : undefined;
  for (const message of start?.warnings ?? []) onEvent({ type: 'note', message });
  const settings: FitSettings = saved
    ? { ...saved.options, rebalance: saved.options.rebalance ?? REBALANCE_LAMBDA, backbone: saved.options.backbone ?? false }
    : resolveSettings(options, mode, start ? Boolean(start.backbone) : options.backbone !== false);
  // (A learning rate given with --resume is the one setting that may change: see FitOptions.learningRate.)
  const maxSteps = options.steps ?? Infinity;
  const maxSeconds = options.hours === undefined ? Infinity : options.hours * 3600;
  if (maxSteps === Infinity && maxSeconds === Infinity) throw new UsageError('no budget given', 'pass --hours, --steps or both.');
  const evalEvery = Math.max(1, Math.floor(options.evalEvery ?? 100));
  const checkpointMs = (options.checkpointMinutes ?? 5) * 60_000;

  // Data first: bad data stops the run before a model folder is touched.
  const set = await loadPhotoSet(options.photos, {
    maxSide: settings.photoSize,
    holdout: settings.holdout,
    seed: settings.seed,
    exclude: out,
    onFile: (done, total, file) => onEvent({ type: 'reading', done, total, file }),
  });
  onEvent({
    type: 'data',
    train: set.train.length,
    holdout: set.holdout.length,
    grey: set.grey.length,
    unreadable: set.unreadable,
    otherFiles: set.otherFiles,
  });
  if (saved) checkSameData(saved, set, checkpointFile);
  const guard = await InputGuard.of([...set.train, ...set.holdout].map((p) => p.file).concat(set.grey, set.unreadable.map((u) => u.file)), { hint: outHint });
  if (mode === 'tune' && options.from) for (const name of await readdir(options.from).catch(() => [] as string[])) await guard.add(join(options.from, name));
  await checkFolderFiles(out, guard);
  // What a killed earlier run left half-written in the folder goes before anything new is written.
  await tidyModelFolder(out);

  const backend = await initBackend();
  const { workers, previous: previousWorkers } = chooseWorkers(options.workers, settings, saved?.step, backend.name);
  const bins = abBins();
  const counts = new Float64Array(bins.count);
  for (const photo of set.train) binHistogram(photo.a, photo.b, bins, counts);
  const classWeights = rebalanceWeights(counts, settings.rebalance);

  const backbone: Backbone | undefined = start
    ? start.backbone
    : settings.backbone
      ? await loadBackbone(typeof options.backbone === 'string' ? options.backbone : DEFAULT_MODEL_DIR)
      : undefined;
  const network = start ? start.network : createNetwork({ ...options.network, backbone: settings.backbone });
  // The backbone is frozen: each photo's features are computed once, both ways round for the crops.
  const trainFeatures: PhotoFeatures[] | undefined = backbone
    ? set.train.map((photo, i) => {
        onEvent({ type: 'features', done: i, total: set.train.length + set.holdout.length });
        return { plain: backboneFeatures(backbone, photo.L, photo.width, photo.height), mirrored: backboneFeatures(backbone, photo.L, photo.width, photo.height, true) };
      })
    : undefined;
  // A network that reads a backbone chooses its colours after region pooling; a tuned model keeps its base's.
  const pooling = start ? start.meta.pooling : backbone ? DEFAULT_POOLING : undefined;
  const holdoutFeatures = new Map<Photo, BackboneFeatures>(
    backbone ? set.holdout.map((photo) => [photo, backboneFeatures(backbone, photo.L, photo.width, photo.height)]) : [],
  );
  const temperature = options.temperature ?? start?.meta.temperature ?? DEFAULT_TEMPERATURE;
  const decoding = chooseDecoding({ temperature: options.temperature }, start?.meta.decoding ?? DEFAULT_DECODING);
  if (start && start.bins.count !== bins.count) {
    throw new KinhueError(ErrorCodes.BAD_MODEL, `the model predicts ${start.bins.count} colour bins, this kinhue trains ${bins.count}`, {
      file: options.from,
      hint: 'tune a model written by this version of kinhue.',
    });
  }
  if (settings.freezeEncoder) freezeEncoder(network);
  const trainer = createTrainer(network, { learningRate: settings.learningRate, classWeights });
  const rng = new Random(settings.seed);
  let step = 0;
  let priorSeconds = 0;
  let lossSum = 0;
  let lossCount = 0;
  let sampler: CropSampler;
  /**
   * The next batch, drawn while the workers computed a step, with the random state from before it:
   * a checkpoint keeps that state, so a resumed run draws the same batch again.
   */
  let ahead: { batch: CropBatch; rng: RandomState; sampler: SamplerState } | undefined;
  let best: CheckpointState['best'] = null;
  let grey: Evaluation;
  let before: Evaluation;
  // Scored the way the saved model will colour: its decoding, with the weights it was trained under.
  const evaluate = (photos: Photo[], weights: ArrayLike<number> = classWeights): Promise<Evaluation> =>
    evaluatePhotos(photos, (L, w, h, photo) => {
      const p = predict(network, L, w, h, { decoding, temperature, classWeights: weights, features: holdoutFeatures.get(photo), pooling: pooling ?? false });
      return { a: p.a, b: p.b, width: p.width, height: p.height };
    });

  if (saved) {
    setWeights(network, saved.weights);
    trainer.setState(saved.trainer as TrainerState);
    if (options.learningRate !== undefined && options.learningRate !== settings.learningRate) {
      settings.learningRateChanges = [...(settings.learningRateChanges ?? []), { step: saved.step, learningRate: options.learningRate }];
      settings.learningRate = options.learningRate;
    }
    trainer.learningRate = settings.learningRate;
    rng.setState(saved.rng);
    sampler = new CropSampler(set.train, rng, saved.sampler, trainFeatures);
    step = saved.step;
    priorSeconds = saved.seconds;
    lossSum = saved.lossSum;
    lossCount = saved.lossCount;
    best = saved.best;
    grey = saved.grey;
    before = saved.before;
    await truncateTrainingLog(out, step);
    onEvent({ type: 'resumed', step, seconds: priorSeconds });
  } else {
    sampler = new CropSampler(set.train, rng, undefined, trainFeatures);
    grey = await evaluatePhotos(set.holdout);
    before = await evaluate(set.holdout, start?.classWeights);
    await mkdir(out, { recursive: true });
    await truncateTrainingLog(out, 0);
    if (settings.keep === 'best') best = { step: 0, evaluation: before };
  }
  onEvent({ type: 'baseline', grey, start: before });

  const meta = (evaluation: Evaluation, evaluatedStep: number, seconds: number): ModelMetadataInput => ({
    decoding,
    ...(backbone ? { workingSize: settings.photoSize } : start ? { workingSize: start.meta.workingSize } : {}),
    ...(pooling ? { pooling } : {}),
    temperature,
    classWeights,
    training: {
      mode,
      from: options.from ? resolve(options.from) : null,
      photos: set.train.length,
      heldOutPhotos: set.holdout.length,
      skippedGreyOrToned: set.grey.length,
      steps: step,
      crops: step * settings.batch,
      seconds: Math.round(seconds),
      ...settings,
      heldOut: { grey, before, after: evaluation, evaluatedAtStep: evaluatedStep },
      backend: backend.name,
    },
  });
  const saveKept = async (evaluation: Evaluation, evaluatedStep: number, seconds: number): Promise<void> => {
    await saveModel(network, out, meta(evaluation, evaluatedStep, seconds), backbone);
    onEvent({ type: 'model', step, dir: out });
  };
  if (!saved && settings.keep === 'best') await saveKept(before, 0, 0);

  const sessionStart = Date.now();
  const elapsed = (): number => priorSeconds + (Date.now() - sessionStart) / 1000;
  let lastCheckpoint = Date.now();
  let lastEvaluation: { step: number; evaluation: Evaluation } | undefined;
  const writeCheckpoint = async (): Promise<void> => {
    const state: CheckpointState = {
      kind: 'kinhue-training-checkpoint',
      version: VERSION,
      mode,
      step,
      seconds: elapsed(),
      lossSum,
      lossCount,
      rng: ahead?.rng ?? rng.getState(),
      sampler: ahead?.sampler ?? sampler.getState(),
      options: settings,
      trainFiles: set.train.map((p) => p.file),
      holdoutFiles: set.holdout.map((p) => p.file),
      best,
      grey,
      before,
      weights: network.getWeights().map((w) => w.dataSync() as Float32Array),
      trainer: await trainer.getState(),
    };
    await saveCheckpoint(checkpointFile, state as unknown as Record<string, unknown>);
    lastCheckpoint = Date.now();
    onEvent({ type: 'checkpoint', step, file: checkpointFile });
  };

  /** Evaluates the current weights, logs the result, and saves the model when keeping the best. */
  const recordEvaluation = async (): Promise<void> => {
    const evaluation = await evaluate(set.holdout);
    lastEvaluation = { step, evaluation };
    const improved = !best || evaluation.ciede2000 < best.evaluation.ciede2000;
    if (improved) best = { step, evaluation };
    const loss = lossSum / Math.max(1, lossCount);
    const { ciede2000, psnr, colourfulness, rightHue, falseColour, leftGrey } = evaluation;
    await appendTrainingLog(out, {
      step, seconds: elapsed(), loss, ciede2000, psnr, colourfulness, rightHue, falseColour, leftGrey, best: improved, time: new Date().toISOString(),
    });
    onEvent({ type: 'evaluation', step, loss, evaluation, best: improved });
    lossSum = 0;
    lossCount = 0;
    if (improved && settings.keep === 'best') await saveKept(evaluation, step, elapsed());
  };

  onEvent({ type: 'workers', workers, step, ...(previousWorkers !== undefined ? { previous: previousWorkers } : {}) });
  const parallel = workers > 1 ? new ParallelTrainer(network, trainer, { workers, classWeights, backend: backend.name }) : undefined;
  let stoppedBy: FitResult['stoppedBy'] = 'steps';
  try {
    for (;;) {
      if (step >= maxSteps) break;
      if (elapsed() >= maxSeconds) {
        stoppedBy = 'time';
        break;
      }
      // A step on this thread runs synchronously: let signal handlers (Ctrl-C) run between steps, or a stop would wait for the next evaluation.
      await new Promise((next) => setImmediate(next));
      if (options.signal?.aborted) {
        stoppedBy = 'interrupted';
        break;
      }
      const batch = ahead?.batch ?? sampler.next(settings.batch, settings.crop);
      ahead = undefined;
      let loss: number;
      if (parallel) {
        // The shards are on their way when step() returns; the main thread draws the next batch meanwhile.
        const computed = parallel.step(batch.L, batch.ab, batch.n, batch.size, batch.size, batch.borrowed);
        if (step + 1 < maxSteps) {
          const before = { rng: rng.getState(), sampler: sampler.getState() };
          ahead = { ...before, batch: sampler.next(settings.batch, settings.crop) };
        }
        loss = await computed;
      } else {
        loss = trainer.step(batch.L, batch.ab, batch.n, batch.size, batch.size, batch.borrowed);
      }
      step++;
      lossSum += loss;
      lossCount++;
      const seconds = elapsed();
      const perStep = (seconds - priorSeconds) / Math.max(1, step - (saved?.step ?? 0));
      const secondsLeft = Math.min(maxSeconds - seconds, (maxSteps - step) * perStep);
      const fraction = Math.max(maxSteps === Infinity ? 0 : step / maxSteps, maxSeconds === Infinity ? 0 : seconds / maxSeconds);
      onEvent({ type: 'step', step, loss, seconds, secondsLeft: Math.max(0, secondsLeft), fraction: Math.min(1, fraction), heldOut: lastEvaluation?.evaluation.ciede2000 ?? best?.evaluation.ciede2000 });

      if (step % evalEvery === 0) await recordEvaluation();
      if (Date.now() - lastCheckpoint >= checkpointMs) {
        await writeCheckpoint();
        if (settings.keep === 'last') await saveKept(lastEvaluation?.evaluation ?? before, lastEvaluation?.step ?? 0, elapsed());
      }
    }
  } finally {
    // Ended on finishing, on an error and on Ctrl-C alike: no thread keeps the process alive.
    await parallel?.close();
  }

  // The end: one more evaluation of the last weights when the loop did not just make one.
  if (step > 0 && lastEvaluation?.step !== step && (stoppedBy !== 'interrupted' || settings.keep === 'last')) await recordEvaluation();
  await writeCheckpoint();
  const seconds = elapsed();
  let after: Evaluation;
  let keptStep: number;
  if (settings.keep === 'best' && best) {
    after = best.evaluation;
    keptStep = best.step;
  } else {
    after = lastEvaluation?.step === step ? lastEvaluation.evaluation : await evaluate(set.holdout);
    keptStep = step;
    await saveKept(after, step, seconds);
  }

  const result: FitResult = {
    mode,
    out,
    steps: step,
    crops: step * settings.batch,
    seconds,
    stoppedBy,
    photos: { train: set.train.length, holdout: set.holdout.length, grey: set.grey.length, unreadable: set.unreadable.length },
    heldOut: { grey, before, after, keptStep },
    options: settings,
  };
  const record = { ...result, budget: { hours: options.hours ?? null, steps: options.steps ?? null }, decoding, temperature, backend: backend.name, holdoutFiles: set.holdout.map((p) => p.file), skippedGreyOrToned: set.grey, unreadable: set.unreadable };
  await writeFileAtomic(join(out, SUMMARY_FILE), `${JSON.stringify(record, null, 2)}\n`);
  trainer.dispose?.();
  network.dispose();
  return result;
}

function setWeights(network: tf.LayersModel, weights: Float32Array[]): void {
  const current = network.getWeights();
  if (weights.length !== current.length || weights.some((w, i) => w.length !== current[i]!.size)) {
    throw new KinhueError(ErrorCodes.BAD_DATA, 'the checkpoint holds weights of a different network', {
      hint: 'start a new run without --resume.',
    });
  }
  const tensors = weights.map((w, i) => tf.tensor(w, current[i]!.shape));
  network.setWeights(tensors);
  tf.dispose(tensors);
}

/**
 * Sets and returns `settings.workers` for this session: the number asked for, else the checkpoint's (1
 * before workers existed), else the default. A number that differs from the checkpoint's is recorded
 * with the step it applies from; `previous` is then the checkpoint's.
 */
function chooseWorkers(asked: number | undefined, settings: FitSettings, savedStep: number | undefined, backend: string): { workers: number; previous?: number } {
  if (asked !== undefined && !(Number.isInteger(asked) && asked >= 1)) throw new UsageError(`workers must be a whole number of at least 1, got ${asked}`, 'pass --workers 1 or more.');
  let previous: number | undefined;
  if (savedStep === undefined) {
    settings.workers = asked ?? defaultWorkers(settings.batch, backend);
  } else {
    const before = settings.workers ?? 1;
    settings.workers = asked ?? before;
    if (settings.workers !== before) {
      settings.workerChanges = [...(settings.workerChanges ?? []), { step: savedStep, previous: before, workers: settings.workers }];
      previous = before;
    }
  }
  if (settings.workers > settings.batch) {
    throw new UsageError(
      `${settings.workers} workers for ${settings.batch} crops a step: each worker needs at least one crop`,
      `pass --workers ${settings.batch} or fewer${savedStep === undefined ? ', or a larger --batch' : ''}.`,
    );
  }
  return previous === undefined ? { workers: settings.workers } : { workers: settings.workers, previous };
}

async function exists(path: string): Promise<boolean> {
  try {
    await stat(path);
    return true;
  } catch {
    return false;
  }
}

function checkSameData(saved: CheckpointState, set: PhotoSet, file: string): void {
  const same = (x: string[], y: string[]): boolean => x.length === y.length && x.every((v, i) => v === y[i]);
  if (!same(saved.trainFiles, set.train.map((p) => p.file)) || !same(saved.holdoutFiles, set.holdout.map((p) => p.file))) {
    throw new KinhueError(ErrorCodes.BAD_DATA, 'the photos differ from those the checkpoint was trained on, so the run cannot continue exactly', {
      file,
      hint: 'resume with the same photo folders, or start a new run without --resume.',
    });
  }
}
