/**
 * The fit loop behind `kinhue train` and `kinhue tune`: read the photos, draw batches of crops,
 * take optimiser steps within a step and/or time budget, evaluate on the held-out photos every so
 * often, write checkpoints atomically, and save the model (the last one for train, for tune the best on
 * the validation photos by CIEDE2000 and right hue together: evaluation.ts' choiceScore). A resumed run continues from its checkpoint and reaches the same weights
 * as an uninterrupted one with the same seed.
 */
import { mkdir, readdir, rm, stat } from 'node:fs/promises';
import { basename, join, resolve } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import { ErrorCodes, KinhueError, UsageError } from '../errors.js';
import { checkFolderFiles, InputGuard, inputInside, OutputOnInputError } from '../files/index.js';
import { writeFileAtomic } from '../files/index.js';
import {
  chooseDecoding,
  DEFAULT_DECODING,
  DEFAULT_VIVIDNESS,
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
  METADATA_FILE,
  predict,
  rebalanceWeights,
  saveModel,
  tidyModelFolder,
  type ModelMetadataInput,
  type TrainerState,
} from '../model/index.js';
import { VERSION } from '../version.js';
import { CHECKPOINT_FILE, loadCheckpoint, saveCheckpoint } from './checkpoint.js';
import { type CropDraw, CropSampler, type PhotoFeatures, type SamplerState } from './crop-sampler.js';
import { choiceScore, evaluatePhotos, type Evaluation } from './evaluation.js';
import {
  choosesStep,
  fitDefault,
  SUMMARY_FILE,
  resolveSettings,
  type FitEvent,
  type FitMode,
  type FitOptions,
  type FitResult,
  type BestSoFar,
  type FitSettings,
  type StoppedBy,
} from './fit-options.js';
import { defaultWorkers, ParallelTrainer } from './parallel-trainer.js';
import { loadPhotoSet, type Photo, type PhotoSet } from './photo-set.js';
import { Random, type RandomState } from './random.js';
import { appendTrainingLog, readTrainingLog, truncateTrainingLog } from './training-log.js';
import { startAverage, updateAverage, weightValues, weightViews, type WeightAverageState } from './weight-average.js';

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
  /** The best evaluation so far on the validation photos (on the held-out ones in runs from before the split). */
  best: { step: number; evaluation: Evaluation } | null;
  /** Held-out figures of grey and of the starting weights. */
  grey: Evaluation;
  before: Evaluation;
  /** The validation photos and their figures of grey and of the starting weights (absent in runs from before the split). */
  validation?: { files: string[]; grey: Evaluation; before: Evaluation };
  weights: Float32Array[];
  /** The running average of the weights (runs with averageOver). */
  average?: WeightAverageState;
  trainer: unknown;
}

/** An improvement of the validation choice score (choiceScore) smaller than this is rounding, not learning (our own margin). */
export const MIN_IMPROVEMENT = 0.01;

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
    throw new OutputOnInputError(
      out,
      heldInput,
      outHint,
      `the model folder is, or holds, the input ${heldInput} (perhaps through a link); writing the model there would change it`,
    );
  }
  const checkpointFile = join(out, CHECKPOINT_FILE);
  const hasCheckpoint = await exists(checkpointFile);
  const hasModel = await exists(join(out, METADATA_FILE));
  // A folder in use is not a mistake in the command's shape: the reason alone, without the help.
  const inUse = { aboutCommandLine: false };
  if (!options.resume && hasCheckpoint) {
    throw new UsageError(
      `${out} holds an unfinished or finished training run (${CHECKPOINT_FILE})`,
      'add --resume to continue it, or choose another --out folder.',
      inUse,
    );
  }
  if (!options.resume && hasModel) {
    throw new UsageError(
      `${out} already holds a model`,
      `choose another --out folder, or tune that model further with --from ${options.out}.`,
      inUse,
    );
  }
  if (options.resume && !hasCheckpoint && hasModel) {
    throw new UsageError(
      `the run in ${out} has finished and its checkpoint was removed (a finished folder keeps it only with --keep-checkpoint)`,
      `tune that model further with --from ${options.out} and a new --out folder.`,
      inUse,
    );
  }
  const saved = options.resume ? ((await loadCheckpoint(checkpointFile)) as unknown as CheckpointState) : undefined;
  if (saved && saved.kind !== 'kinhue-training-checkpoint') {
    throw new KinhueError(ErrorCodes.BAD_DATA, 'not a kinhue training checkpoint', {
      file: checkpointFile,
      hint: 'run without --resume to start again.',
    });
  }
  if (mode === 'tune' && !options.from) throw new UsageError('tune needs a model to start from', 'pass --from <model folder>.');

  // The checkpoint's settings win on resume: the same run must continue. Checkpoints from before an
  // option existed get what those runs did: rebalancing 0.5, no backbone, no validation split, no early stop.
  const start = mode === 'tune' ? await loadModel(options.from!) : undefined;
  for (const message of start?.warnings ?? []) onEvent({ type: 'note', message });
  const baseRebalance = start?.meta.training?.rebalance;
  const settings: FitSettings = saved
    ? {
        ...saved.options,
        rebalance: saved.options.rebalance ?? REBALANCE_LAMBDA,
        backbone: saved.options.backbone ?? false,
        validation: saved.options.validation ?? 0,
        averageOver: saved.options.averageOver ?? 0,
        patience: options.patience ?? saved.options.patience ?? 0,
      }
    : resolveSettings(
        options,
        mode,
        start ? Boolean(start.backbone) : options.backbone !== false,
        typeof baseRebalance === 'number' ? baseRebalance : undefined,
      );
  // (A learning rate given with --resume is the one setting that changes the weights: see FitOptions.learningRate.)
  // Without validation photos nothing may be chosen: the held-out photos would choose, and their figures lie.
  const chooses = choosesStep(settings);
  if (!saved && settings.validation === 0 && chooses) {
    throw new UsageError(
      `--validation 0 leaves no photos to choose the step kept${settings.patience ? ' and when to stop' : ''}`,
      `give --validation above 0${mode === 'tune' ? ' (tune keeps its best step)' : ', or --patience 0'}.`,
    );
  }
  const maxSteps = options.steps ?? Infinity;
  const maxSeconds = options.hours === undefined ? Infinity : options.hours * 3600;
  if (maxSteps === Infinity && maxSeconds === Infinity) throw new UsageError('no budget given', 'pass --hours, --steps or both.');
  if (saved && (saved.step >= maxSteps || saved.seconds >= maxSeconds)) {
    const budget = saved.step >= maxSteps ? `--steps ${options.steps}` : `--hours ${options.hours}`;
    throw new UsageError(
      `the run in ${out} already reached its budget (${budget}) at step ${saved.step}; nothing to do`,
      'give a larger --steps or --hours to continue it.',
      inUse,
    );
  }
  const evalEvery = Math.max(1, Math.floor(options.evalEvery ?? fitDefault<number>('evalEvery', mode)!));
  const checkpointMs = (options.checkpointMinutes ?? fitDefault<number>('checkpointMinutes', mode)!) * 60_000;

  // Data first: bad data stops the run before a model folder is touched.
  const set = await loadPhotoSet(options.photos, {
    maxSide: settings.photoSize,
    holdout: settings.holdout,
    validation: settings.validation,
    seed: settings.seed,
    exclude: out,
    onFile: (done, total, file) => onEvent({ type: 'reading', done, total, file }),
  });
  onEvent({
    type: 'data',
    train: set.train.length,
    validation: set.validation.length,
    holdout: set.holdout.length,
    grey: set.grey.length,
    unreadable: set.unreadable,
    otherFiles: set.otherFiles,
  });
  // A run from before the validation split goes on choosing on its held-out photos, with the same photo order.
  const validationSet = set.validation.length > 0 ? set.validation : set.holdout;
  if (set.validation.length === 0) {
    onEvent({
      type: 'note',
      message: chooses
        ? 'this run was started before kinhue kept validation photos apart: it chooses its steps on the held-out photos, so their figures are not independent'
        : 'no validation photos: the held-out photos are measured along the way, but nothing is chosen on them (the last weights are kept)',
    });
  }
  if (saved) checkSameData(saved, set, checkpointFile);
  const guard = await InputGuard.of(
    [...set.train, ...set.validation, ...set.holdout]
      .map((p) => p.file)
      .concat(
        set.grey,
        set.unreadable.map((u) => u.file),
      ),
    { hint: outHint },
  );
  if (mode === 'tune' && options.from)
    for (const name of await readdir(options.from).catch(() => [] as string[])) await guard.add(join(options.from, name));
  await checkFolderFiles(out, guard);
  // What a killed earlier run left half-written in the folder goes before anything new is written.
  await tidyModelFolder(out);

  const backend = await initBackend();
  const { workers, previous: previousWorkers } = chooseWorkers(options.workers, settings, saved?.step, backend.name);
  const bins = abBins();
  if (start && start.bins.count !== bins.count) {
    throw new KinhueError(ErrorCodes.BAD_MODEL, `the model predicts ${start.bins.count} colour bins, this kinhue trains ${bins.count}`, {
      file: options.from,
      hint: 'tune a model written by this version of kinhue.',
    });
  }
  // A tuned model keeps its base's class weights, and so its decoding, unless a rebalancing is asked for:
  // new weights would change the colours chosen before any learning (and training under them would too).
  if (settings.classWeightsFrom === 'base' && start?.classWeights.length !== bins.count) {
    settings.classWeightsFrom = 'photos';
    onEvent({
      type: 'note',
      message: `the model tuned from records no class weights: they come from these photos (rebalancing ${settings.rebalance})`,
    });
  }
  let classWeights: Float32Array;
  if (settings.classWeightsFrom === 'base') {
    classWeights = Float32Array.from(start!.classWeights);
  } else {
    const counts = new Float64Array(bins.count);
    for (const photo of set.train) binHistogram(photo.a, photo.b, bins, counts);
    classWeights = rebalanceWeights(counts, settings.rebalance);
  }

  const backbone: Backbone | undefined = start
    ? start.backbone
    : settings.backbone
      ? await loadBackbone(typeof options.backbone === 'string' ? options.backbone : DEFAULT_MODEL_DIR)
      : undefined;
  const network = start ? start.network : createNetwork({ ...options.network, backbone: settings.backbone });
  // The backbone is frozen: each photo's features are computed once, both ways round for the crops.
  const evaluated = [...set.validation, ...set.holdout];
  const trainFeatures: PhotoFeatures[] | undefined = backbone
    ? set.train.map((photo, i) => {
        onEvent({ type: 'features', done: i, total: set.train.length + evaluated.length });
        return {
          plain: backboneFeatures(backbone, photo.L, photo.width, photo.height),
          mirrored: backboneFeatures(backbone, photo.L, photo.width, photo.height, true),
        };
      })
    : undefined;
  // A network that reads a backbone chooses its colours after region pooling; a tuned model keeps its base's.
  const pooling = start ? start.meta.pooling : backbone ? DEFAULT_POOLING : undefined;
  const evaluatedFeatures = new Map<Photo, BackboneFeatures>(
    backbone ? evaluated.map((photo) => [photo, backboneFeatures(backbone, photo.L, photo.width, photo.height)]) : [],
  );
  const temperature = options.temperature ?? start?.meta.temperature ?? DEFAULT_TEMPERATURE;
  const decoding = chooseDecoding({ temperature: options.temperature }, start?.meta.decoding ?? DEFAULT_DECODING);
  const vividness = start?.meta.vividness ?? DEFAULT_VIVIDNESS;
  if (settings.freezeEncoder) freezeEncoder(network);
  const trainer = createTrainer(network, { learningRate: settings.learningRate, classWeights });
  const rng = new Random(settings.seed);
  /** The weights' running average, which is evaluated and saved in place of the last weights. */
  let average: WeightAverageState | undefined;
  let step = 0;
  let priorSeconds = 0;
  let lossSum = 0;
  let lossCount = 0;
  let sampler: CropSampler;
  /**
   * The next step's crops, drawn before the workers computed a step (they cut them ahead), with the
   * random state from before them: a checkpoint keeps that state, so a resumed run draws them again.
   */
  let ahead: { draws: CropDraw[]; rng: RandomState; sampler: SamplerState } | undefined;
  let best: CheckpointState['best'] = null;
  /** The best weights when this session reached them (else they are the model in `out`). */
  let bestWeights: Float32Array[] | undefined;
  /** Evaluations since the best, for early stopping. */
  let sinceBest = 0;
  let grey: Evaluation;
  let before: Evaluation;
  let validation: { grey: Evaluation; before: Evaluation };
  // Every figure, before and after, is scored the way the saved model will colour: its decoding, with its class weights.
  const evaluate = (photos: Photo[]): Promise<Evaluation> =>
    evaluatePhotos(photos, (L, w, h, photo) => {
      const p = predict(network, L, w, h, {
        decoding,
        temperature,
        vividness,
        classWeights,
        features: evaluatedFeatures.get(photo),
        pooling: pooling ?? false,
      });
      return { a: p.a, b: p.b, width: p.width, height: p.height };
    });

  if (saved) {
    setWeights(network, saved.weights);
    average = saved.average;
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
    validation = saved.validation ?? { grey, before };
    await truncateTrainingLog(out, step);
    if (best) sinceBest = (await readTrainingLog(out)).filter((e) => e.step > best!.step).length;
    onEvent({ type: 'resumed', step, seconds: priorSeconds });
  } else {
    sampler = new CropSampler(set.train, rng, undefined, trainFeatures);
    grey = await evaluatePhotos(set.holdout);
    before = await evaluate(set.holdout);
    validation =
      set.validation.length > 0 ? { grey: await evaluatePhotos(set.validation), before: await evaluate(set.validation) } : { grey, before };
    await mkdir(out, { recursive: true });
    await truncateTrainingLog(out, 0);
    if (settings.keep === 'best') best = { step: 0, evaluation: validation.before };
  }
  if (settings.averageOver && !average) average = startAverage(network);
  /** Runs `fn` with the averaged weights in the network (in a run that averages), then puts the last ones back. */
  const withAverage = async <T>(fn: () => Promise<T>): Promise<T> => {
    if (!average) return fn();
    const last = weightValues(network);
    setWeights(network, average.values);
    try {
      return await fn();
    } finally {
      setWeights(network, last);
    }
  };
  onEvent({ type: 'baseline', validation: { grey: validation.grey, start: validation.before }, heldOut: { grey, start: before } });
  const stalled = (): boolean => Boolean(settings.patience && best && sinceBest >= settings.patience);

  const from = start ? { name: start.meta.name, weightsSha256: start.meta.weightsSha256 } : undefined;
  /** The training record of the model folder; `kept` is the step whose weights it holds. */
  const record = (
    kept: number,
    seconds: number,
    heldOut: { after?: Evaluation },
    stoppedBy?: StoppedBy,
  ): ModelMetadataInput['training'] => ({
    mode,
    from: from ?? null,
    photos: set.train.length,
    validationPhotos: set.validation.length,
    heldOutPhotos: set.holdout.length,
    skippedGreyOrToned: set.grey.length,
    steps: step,
    keptStep: kept,
    crops: step * settings.batch,
    seconds: Math.round(seconds),
    ...(stoppedBy ? { stoppedBy } : {}),
    ...settings,
    validation: { grey: validation.grey, before: validation.before, ...(best ? { best: best.evaluation, bestStep: best.step } : {}) },
    heldOut: { grey, before, ...(heldOut.after ? { after: heldOut.after, evaluatedAtStep: kept } : {}) },
    backend: backend.name,
  });
  const metaOf = (training: ModelMetadataInput['training']): ModelMetadataInput => ({
    decoding,
    ...(backbone ? { workingSize: settings.photoSize } : start ? { workingSize: start.meta.workingSize } : {}),
    ...(pooling ? { pooling } : {}),
    temperature,
    vividness,
    classWeights,
    training,
  });
  const saveKept = async (kept: number, seconds: number): Promise<void> => {
    await saveModel(network, out, metaOf(record(kept, seconds, {})), backbone);
    onEvent({ type: 'model', step, dir: out });
  };
  if (!saved && settings.keep === 'best') await saveKept(0, 0);

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
      ...(set.validation.length > 0 ? { validation: { files: set.validation.map((p) => p.file), ...validation } } : {}),
      weights: weightViews(network),
      ...(average ? { average } : {}),
      trainer: await trainer.getState(),
    };
    await saveCheckpoint(checkpointFile, state as unknown as Record<string, unknown>);
    lastCheckpoint = Date.now();
    onEvent({ type: 'checkpoint', step, file: checkpointFile });
  };

  /** Evaluates the current weights on the validation photos, logs the result, and saves the model when keeping the best. */
  const recordEvaluation = (): Promise<void> =>
    withAverage(async () => {
      const evaluation = await evaluate(validationSet);
      lastEvaluation = { step, evaluation };
      const improved = !best || choiceScore(evaluation) < choiceScore(best.evaluation) - MIN_IMPROVEMENT;
      if (improved) {
        best = { step, evaluation };
        sinceBest = 0;
        if (settings.keep === 'best') bestWeights = weightValues(network);
      } else {
        sinceBest++;
      }
      const loss = lossCount > 0 ? lossSum / lossCount : null;
      const { ciede2000, psnr, colourfulness, rightHue, falseColour, leftGrey } = evaluation;
      await appendTrainingLog(out, {
        step,
        seconds: elapsed(),
        loss,
        ciede2000,
        psnr,
        colourfulness,
        rightHue,
        falseColour,
        leftGrey,
        best: improved,
        photos: evaluation.photos,
        time: new Date().toISOString(),
      });
      onEvent({
        type: 'evaluation',
        step,
        loss,
        evaluation,
        best: improved,
        bestSoFar: figuresAt(best!),
      });
      lossSum = 0;
      lossCount = 0;
      if (improved && settings.keep === 'best') await saveKept(step, elapsed());
    });

  onEvent({ type: 'workers', workers, step, ...(previousWorkers !== undefined ? { previous: previousWorkers } : {}) });
  if (stalled()) {
    throw new UsageError(
      `the run in ${out} stopped early: no improvement in ${sinceBest} evaluations since step ${best!.step}`,
      `pass a larger --patience (or --patience 0 for none) with --resume to go on.`,
      inUse,
    );
  }
  const parallel =
    workers > 1
      ? new ParallelTrainer(network, trainer, { workers, classWeights, backend: backend.name, photos: set.train, features: trainFeatures })
      : undefined;
  let stoppedBy: StoppedBy = 'steps';
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
      let loss: number;
      if (parallel) {
        // The workers cut the next step's crops while the optimiser applies this one's gradients.
        const draws = ahead?.draws ?? sampler.draw(settings.batch, settings.crop);
        ahead = undefined;
        if (step + 1 < maxSteps) {
          const before = { rng: rng.getState(), sampler: sampler.getState() };
          ahead = { ...before, draws: sampler.draw(settings.batch, settings.crop) };
        }
        loss = await parallel.step(draws, settings.crop, ahead?.draws);
      } else {
        const batch = sampler.next(settings.batch, settings.crop);
        loss = trainer.step(batch.L, batch.ab, batch.n, batch.size, batch.size, batch.borrowed);
      }
      step++;
      if (average) average = updateAverage(average, weightViews(network), settings.averageOver!);
      lossSum += loss;
      lossCount++;
      const seconds = elapsed();
      const perStep = (seconds - priorSeconds) / Math.max(1, step - (saved?.step ?? 0));
      const secondsLeft = Math.min(maxSeconds - seconds, (maxSteps - step) * perStep);
      const fraction = Math.max(maxSteps === Infinity ? 0 : step / maxSteps, maxSeconds === Infinity ? 0 : seconds / maxSeconds);
      onEvent({
        type: 'step',
        step,
        loss,
        seconds,
        secondsLeft: Math.max(0, secondsLeft),
        fraction: Math.min(1, fraction),
        ...(lastEvaluation ? { last: figuresAt(lastEvaluation) } : {}),
        ...(best ? { best: figuresAt(best) } : {}),
      });

      if (step % evalEvery === 0) await recordEvaluation();
      if (stalled()) {
        stoppedBy = 'no-improvement';
        const { ciede2000, rightHue } = best!.evaluation;
        onEvent({ type: 'stalled', step, bestStep: best!.step, ciede2000, rightHue, patience: settings.patience! });
        break;
      }
      if (Date.now() - lastCheckpoint >= checkpointMs) {
        await writeCheckpoint();
        if (settings.keep === 'last') await withAverage(() => saveKept(step, elapsed()));
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
  // The model kept: the best on the validation photos, or the last; then, once, its held-out figures.
  let keptStep = step;
  if (settings.keep === 'best' && best && best.step !== step) {
    keptStep = best.step;
    setWeights(network, bestWeights ?? (await keptWeights(out)));
  } else if (average) {
    setWeights(network, average.values);
  }
  const after = await evaluate(set.holdout);
  const finished = stoppedBy !== 'interrupted';
  const checkpointKept = !finished || Boolean(options.keepCheckpoint);
  await saveModel(network, out, metaOf(record(keptStep, seconds, { after }, stoppedBy)), backbone);
  onEvent({ type: 'model', step: keptStep, dir: out });

  const result: FitResult = {
    mode,
    out,
    steps: step,
    crops: step * settings.batch,
    seconds,
    stoppedBy,
    checkpointKept,
    photos: {
      train: set.train.length,
      validation: set.validation.length,
      holdout: set.holdout.length,
      grey: set.grey.length,
      unreadable: set.unreadable.length,
    },
    validation: {
      grey: validation.grey,
      before: validation.before,
      best: best?.evaluation ?? lastEvaluation?.evaluation ?? validation.before,
      bestStep: best?.step ?? keptStep,
    },
    heldOut: { grey, before, after, keptStep },
    holdoutFiles: set.holdout.map((p) => p.file),
    ...(from ? { from } : {}),
    options: settings,
  };
  // Names below the photo folders given, never this machine's paths.
  const { out: _out, holdoutFiles: _files, ...shared } = result;
  const summary = {
    ...shared,
    out: basename(out),
    budget: { hours: options.hours ?? null, steps: options.steps ?? null },
    decoding,
    temperature,
    backend: backend.name,
    holdoutFiles: set.holdout.map((p) => p.name),
    validationFiles: set.validation.map((p) => p.name),
    skippedGreyOrToned: set.grey.map((f) => basename(f)),
    unreadable: set.unreadable.map((u) => ({ file: basename(u.file), reason: u.reason })),
  };
  await writeFileAtomic(join(out, SUMMARY_FILE), `${JSON.stringify(summary, null, 2)}\n`);
  if (!checkpointKept) await rm(checkpointFile, { force: true });
  trainer.dispose?.();
  network.dispose();
  return result;
}

/** The figures that choose a step, with its step. */
function figuresAt(at: { step: number; evaluation: Evaluation }): BestSoFar {
  return { step: at.step, ciede2000: at.evaluation.ciede2000, rightHue: at.evaluation.rightHue };
}

/** The weights of the model folder `dir` (the best kept so far, written when it was reached). */
async function keptWeights(dir: string): Promise<Float32Array[]> {
  const model = await loadModel(dir);
  const weights = weightValues(model.network);
  model.network.dispose();
  return weights;
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
function chooseWorkers(
  asked: number | undefined,
  settings: FitSettings,
  savedStep: number | undefined,
  backend: string,
): { workers: number; previous?: number } {
  if (asked !== undefined && !(Number.isInteger(asked) && asked >= 1))
    throw new UsageError(`workers must be a whole number of at least 1, got ${asked}`, 'pass --workers 1 or more.');
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
  if (
    !same(
      saved.trainFiles,
      set.train.map((p) => p.file),
    ) ||
    !same(
      saved.holdoutFiles,
      set.holdout.map((p) => p.file),
    ) ||
    !same(
      saved.validation?.files ?? [],
      set.validation.map((p) => p.file),
    )
  ) {
    throw new KinhueError(
      ErrorCodes.BAD_DATA,
      'the photos differ from those the checkpoint was trained on, so the run cannot continue exactly',
      {
        file,
        hint: 'resume with the same photo folders, or start a new run without --resume.',
      },
    );
  }
}
