import { mkdir, mkdtemp, readdir, readFile, rm, stat } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import sharp from 'sharp';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { labToSrgb } from '../src/colour/index.js';
import { DEFAULT_MODEL_DIR, encoderLayerNames, loadModel, predict } from '../src/model/index.js';
import {
  CHECKPOINT_FILE,
  Random,
  SUMMARY_FILE,
  TRAINING_LOG_FILE,
  choiceScore,
  evaluatePhotos,
  fit,
  loadCheckpoint,
  loadPhotoSet,
  MIN_IMPROVEMENT,
  RIGHT_HUE_PER_CIEDE2000,
  readTrainingLog,
  saveCheckpoint,
  type FitEvent,
  type FitOptions,
} from '../src/training/index.js';

// Small enough for CI: a narrow network, 32-pixel crops, 2 crops a step (common practice for tests).
// L* alone unless a test says otherwise: the backbone costs a detector pass per photo. One thread
// unless a test says otherwise (the default follows the machine's cores). The checkpoint stays in finished
// folders, for the tests that compare or resume them.
const TINY = {
  batch: 2,
  crop: 32,
  photoSize: 64,
  network: { width: 4 },
  evalEvery: 2,
  checkpointMinutes: 60,
  backbone: false,
  workers: 1,
  keepCheckpoint: true,
} satisfies Partial<FitOptions>;

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'kinhue-training-fit-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

/**
 * Generated scenes: a sky gradient above a ground band, with a few discs, colours drawn around
 * fixed hues; `cast` maps each (a*, b*) as a colour cast would (our own test data).
 */
async function writeScenes(folder: string, count: number, seed: number, cast?: (a: number, b: number) => [number, number]): Promise<void> {
  await mkdir(folder, { recursive: true });
  const rng = new Random(seed);
  const w = 96;
  const h = 64;
  for (let k = 0; k < count; k++) {
    const L = new Float32Array(w * h);
    const a = new Float32Array(w * h);
    const b = new Float32Array(w * h);
    const horizon = Math.round(h * rng.uniform(0.35, 0.65));
    const discs = Array.from({ length: 3 }, () => ({
      x: rng.uniform(0, w),
      y: rng.uniform(0, h),
      r: rng.uniform(6, 16),
      L: rng.uniform(30, 80),
      a: rng.uniform(-40, 60),
      b: rng.uniform(-30, 60),
    }));
    for (let y = 0; y < h; y++) {
      for (let x = 0; x < w; x++) {
        const i = y * w + x;
        let l: number, ca: number, cb: number;
        if (y < horizon)
          [l, ca, cb] = [85 - (30 * y) / horizon, -5, -35 + (15 * y) / horizon]; // sky
        else [l, ca, cb] = [35 + 10 * Math.sin(x / 5), -30, 35]; // grass
        for (const d of discs) if ((x - d.x) ** 2 + (y - d.y) ** 2 < d.r ** 2) [l, ca, cb] = [d.L, d.a, d.b];
        if (cast) [ca, cb] = cast(ca, cb);
        L[i] = l;
        a[i] = ca;
        b[i] = cb;
      }
    }
    const rgb = labToSrgb({ L, a, b }, new Uint8Array(w * h * 3), 3);
    await sharp(Buffer.from(rgb), { raw: { width: w, height: h, channels: 3 } })
      .png()
      .toFile(join(folder, `scene-${seed}-${k}.png`));
  }
}

async function weightsOf(
  out: string,
): Promise<{ weights: Float32Array[]; trainer: { moments: { m: Float32Array; v: Float32Array }[] }; step: number }> {
  return (await loadCheckpoint(join(out, CHECKPOINT_FILE))) as never;
}

describe('fit: resume', () => {
  it('a network reading the backbone resumes bit for bit too, and its folder loads with the backbone', async () => {
    const photos = join(dir, 'scenes-backbone');
    await writeScenes(photos, 6, 13);
    const base = { ...TINY, backbone: DEFAULT_MODEL_DIR, photos: [photos], seed: 4, learningRate: 3e-3 };
    await fit({ ...base, out: join(dir, 'bb-whole'), steps: 4 });
    await fit({ ...base, out: join(dir, 'bb-split'), steps: 2 });
    await fit({ ...base, out: join(dir, 'bb-split'), steps: 4, resume: true });
    const whole = await weightsOf(join(dir, 'bb-whole'));
    const split = await weightsOf(join(dir, 'bb-split'));
    expect(split.weights.map((w) => Array.from(w))).toEqual(whole.weights.map((w) => Array.from(w)));
    const model = await loadModel(join(dir, 'bb-split'));
    expect(model.backbone).toBeDefined();
    expect(model.meta.pooling).toBeDefined();
    expect(model.network.inputs.length).toBe(4);
    model.network.dispose();
  }, 120_000);

  it('an interrupted and resumed run reaches the same weights as an uninterrupted one, bit for bit', async () => {
    const photos = join(dir, 'scenes');
    await writeScenes(photos, 8, 11);
    const base = { ...TINY, photos: [photos], seed: 3, learningRate: 3e-3 };

    const whole = await fit({ ...base, out: join(dir, 'whole'), steps: 6 });
    expect(whole.steps).toBe(6);
    expect(whole.stoppedBy).toBe('steps');

    // Interrupted by its step budget after 3 steps, then resumed to 6.
    const first = await fit({ ...base, out: join(dir, 'split'), steps: 3 });
    expect(first.steps).toBe(3);
    const midway = await weightsOf(join(dir, 'split'));
    const resumed = await fit({ ...base, out: join(dir, 'split'), steps: 6, resume: true });
    expect(resumed.steps).toBe(6);

    // Interrupted by a signal (as Ctrl-C does) after 2 steps, then resumed.
    const controller = new AbortController();
    const stopped = await fit({ ...base, out: join(dir, 'signal'), steps: 6, signal: controller.signal }, (e) => {
      if (e.type === 'step' && e.step === 2) controller.abort();
    });
    expect(stopped.stoppedBy).toBe('interrupted');
    expect(stopped.steps).toBe(2);
    await fit({ ...base, out: join(dir, 'signal'), steps: 6, resume: true });

    const a = await weightsOf(join(dir, 'whole'));
    for (const other of ['split', 'signal']) {
      const b = await weightsOf(join(dir, other));
      expect(b.step).toBe(6);
      expect(b.weights.length).toBe(a.weights.length);
      b.weights.forEach((w, i) => expect(Buffer.from(w.buffer).equals(Buffer.from(a.weights[i]!.buffer))).toBe(true));
      b.trainer.moments.forEach((m, i) => expect(Buffer.from(m.v.buffer).equals(Buffer.from(a.trainer.moments[i]!.v.buffer))).toBe(true));
    }
    // The weights did change after step 3 (so the comparison means something).
    expect(a.weights.some((w, i) => !Buffer.from(w.buffer).equals(Buffer.from(midway.weights[i]!.buffer)))).toBe(true);

    // The log has one line per evaluation (steps 2, 4, 6), also after a resume (no duplicates).
    const log = await readTrainingLog(join(dir, 'whole'));
    expect(log.map((e) => e.step)).toEqual([2, 4, 6]);
    // Each line carries the hue figures too (the generated scenes have clearly coloured sky and grass).
    for (const e of log) {
      expect(e.rightHue).toBeGreaterThanOrEqual(0);
      expect(e.falseColour).toBeGreaterThanOrEqual(0);
      expect(e.leftGrey).toBeGreaterThanOrEqual(0);
    }
    expect((await readTrainingLog(join(dir, 'split'))).map((e) => e.step)).toEqual([2, 3, 4, 6]);
    const files = await readdir(join(dir, 'whole'));
    for (const f of [CHECKPOINT_FILE, TRAINING_LOG_FILE, SUMMARY_FILE, 'model.json']) expect(files).toContain(f);
    const summary = JSON.parse(await readFile(join(dir, 'whole', SUMMARY_FILE), 'utf8'));
    expect(summary.heldOut.grey.ciede2000).toBeGreaterThan(0);
  });

  it('--average-over saves the running average of the weights, which a resumed run continues bit for bit', async () => {
    const photos = join(dir, 'scenes');
    await writeScenes(photos, 8, 11);
    const base = { ...TINY, photos: [photos], seed: 3, learningRate: 3e-3 };
    const last = await fit({ ...base, out: join(dir, 'avg-last'), steps: 4 });
    const averaged = await fit({ ...base, out: join(dir, 'avg-whole'), steps: 4, averageOver: 3 });
    await fit({ ...base, out: join(dir, 'avg-split'), steps: 2, averageOver: 3 });
    const resumed = await fit({ ...base, out: join(dir, 'avg-split'), steps: 4, resume: true });
    expect(resumed.options.averageOver).toBe(3);
    expect(last.options.averageOver).toBe(0);

    // The optimiser's own weights are those of the run without averaging: averaging only reads them.
    const plain = await weightsOf(join(dir, 'avg-last'));
    const whole = await weightsOf(join(dir, 'avg-whole'));
    const split = await weightsOf(join(dir, 'avg-split'));
    whole.weights.forEach((w, i) => expect(Buffer.from(w.buffer).equals(Buffer.from(plain.weights[i]!.buffer))).toBe(true));
    split.weights.forEach((w, i) => expect(Buffer.from(w.buffer).equals(Buffer.from(whole.weights[i]!.buffer))).toBe(true));
    const saved = async (name: string) => {
      const model = await loadModel(join(dir, name));
      const values = model.network.getWeights().map((w) => w.dataSync() as Float32Array);
      model.network.dispose();
      return values;
    };
    const [savedLast, savedWhole, savedSplit] = [await saved('avg-last'), await saved('avg-whole'), await saved('avg-split')];
    savedSplit.forEach((w, i) => expect(Buffer.from(w.buffer).equals(Buffer.from(savedWhole[i]!.buffer))).toBe(true));
    // The saved model is the checkpoint's average of 4 steps, not the last weights (which the run without averaging saved).
    const average = (
      (await loadCheckpoint(join(dir, 'avg-whole', CHECKPOINT_FILE))) as { average: { values: Float32Array[]; updates: number } }
    ).average;
    expect(average.updates).toBe(4);
    savedWhole.forEach((w, i) => expect(Buffer.from(w.buffer).equals(Buffer.from(average.values[i]!.buffer))).toBe(true));
    savedLast.forEach((w, i) => expect(Buffer.from(w.buffer).equals(Buffer.from(whole.weights[i]!.buffer))).toBe(true));
    expect(savedWhole.some((w, i) => !Buffer.from(w.buffer).equals(Buffer.from(savedLast[i]!.buffer)))).toBe(true);
    expect(averaged.heldOut.after.ciede2000).toBeGreaterThan(0);
  });

  it('a learning rate given on resume applies from the next step and is recorded', async () => {
    const photos = join(dir, 'scenes');
    const base = { ...TINY, photos: [photos], seed: 3, learningRate: 3e-3, evalEvery: 100 };
    await fit({ ...base, out: join(dir, 'same'), steps: 4 });
    await fit({ ...base, out: join(dir, 'lower'), steps: 2 });
    const result = await fit({ ...base, out: join(dir, 'lower'), steps: 4, resume: true, learningRate: 1e-4 });
    expect(result.options.learningRate).toBe(1e-4);
    expect(result.options.learningRateChanges).toEqual([{ step: 2, learningRate: 1e-4 }]);
    const lower = (await loadCheckpoint(join(dir, 'lower', CHECKPOINT_FILE))) as {
      trainer: { learningRate: number };
      weights: Float32Array[];
    };
    expect(lower.trainer.learningRate).toBe(1e-4);
    const same = await weightsOf(join(dir, 'same'));
    expect(lower.weights.some((w, i) => !Buffer.from(w.buffer).equals(Buffer.from(same.weights[i]!.buffer)))).toBe(true);
  });

  it('refuses to start over an existing run without --resume, and to resume where there is none', async () => {
    const photos = join(dir, 'scenes');
    await expect(fit({ ...TINY, photos: [photos], out: join(dir, 'whole'), steps: 1 })).rejects.toMatchObject({ code: 'KH_USAGE' });
    await expect(fit({ ...TINY, photos: [photos], out: join(dir, 'none'), steps: 1, resume: true })).rejects.toMatchObject({
      code: 'KH_UNREADABLE',
    });
  });

  it('writes no model for bad data', async () => {
    const empty = join(dir, 'empty');
    await mkdir(empty, { recursive: true });
    const out = join(dir, 'bad-out');
    await expect(fit({ ...TINY, photos: [empty], out, steps: 1 })).rejects.toMatchObject({ code: 'KH_BAD_DATA' });
    await expect(stat(out)).rejects.toMatchObject({ code: 'ENOENT' });
  });
});

describe('fit: worker threads', () => {
  // 3 crops a step on 2 workers: shards of 2 and 1 crops.
  const PARALLEL = { ...TINY, batch: 3, seed: 6, learningRate: 3e-3, evalEvery: 100 };
  const same = (x: Float32Array[], y: Float32Array[]): boolean =>
    x.length === y.length && x.every((w, i) => Buffer.from(w.buffer).equals(Buffer.from(y[i]!.buffer)));

  it('two workers: the same seed gives the same weights bit for bit, and an interrupted and resumed run reaches them too', async () => {
    const photos = join(dir, 'scenes-parallel');
    await writeScenes(photos, 6, 17);
    const base = { ...PARALLEL, photos: [photos] };
    const events: FitEvent[] = [];
    const first = await fit({ ...base, out: join(dir, 'par-a'), steps: 4, workers: 2 }, (e) => events.push(e));
    expect(first.options.workers).toBe(2);
    expect(events.filter((e) => e.type === 'workers')).toEqual([{ type: 'workers', workers: 2, step: 0 }]);
    await fit({ ...base, out: join(dir, 'par-b'), steps: 4, workers: 2 });
    // Interrupted after 2 steps, then resumed without naming the number: the checkpoint's 2 go on.
    await fit({ ...base, out: join(dir, 'par-split'), steps: 2, workers: 2 });
    const resumedEvents: FitEvent[] = [];
    const resumed = await fit({ ...base, workers: undefined, out: join(dir, 'par-split'), steps: 4, resume: true }, (e) =>
      resumedEvents.push(e),
    );
    expect(resumed.options.workers).toBe(2);
    expect(resumed.options.workerChanges).toBeUndefined();
    expect(resumedEvents.find((e) => e.type === 'workers')).toEqual({ type: 'workers', workers: 2, step: 2 });

    // Interrupted by a signal (as Ctrl-C does) after 2 steps, while the next batch was already drawn.
    const controller = new AbortController();
    const stopped = await fit({ ...base, out: join(dir, 'par-signal'), steps: 4, workers: 2, signal: controller.signal }, (e) => {
      if (e.type === 'step' && e.step === 2) controller.abort();
    });
    expect(stopped.steps).toBe(2);
    await fit({ ...base, workers: undefined, out: join(dir, 'par-signal'), steps: 4, resume: true });

    const a = await weightsOf(join(dir, 'par-a'));
    for (const other of ['par-b', 'par-split', 'par-signal']) {
      const b = await weightsOf(join(dir, other));
      expect(b.step).toBe(4);
      expect(same(b.weights, a.weights), other).toBe(true);
      expect(
        same(
          b.trainer.moments.map((m) => m.m),
          a.trainer.moments.map((m) => m.m),
        ),
        other,
      ).toBe(true);
      expect(
        same(
          b.trainer.moments.map((m) => m.v),
          a.trainer.moments.map((m) => m.v),
        ),
        other,
      ).toBe(true);
    }
    // One thread on the same batches reaches other weights (float rounding, amplified by Adam): the
    // comparisons above are between two-worker runs.
    await fit({ ...base, out: join(dir, 'par-one'), steps: 4, workers: 1 });
    expect(same((await weightsOf(join(dir, 'par-one'))).weights, a.weights)).toBe(false);
  }, 300_000);

  it('resuming with another number of workers says so and records it; a run from before workers resumes on one thread', async () => {
    const photos = join(dir, 'scenes-parallel');
    const base = { ...PARALLEL, photos: [photos] };
    const out = join(dir, 'par-change');
    await fit({ ...base, out, steps: 2, workers: 2 });
    const events: FitEvent[] = [];
    const changed = await fit({ ...base, out, steps: 3, resume: true, workers: 1 }, (e) => events.push(e));
    expect(events.find((e) => e.type === 'workers')).toEqual({ type: 'workers', workers: 1, step: 2, previous: 2 });
    expect(changed.options.workers).toBe(1);
    expect(changed.options.workerChanges).toEqual([{ step: 2, previous: 2, workers: 1 }]);
    const summary = JSON.parse(await readFile(join(out, SUMMARY_FILE), 'utf8'));
    expect(summary.options.workerChanges).toEqual([{ step: 2, previous: 2, workers: 1 }]);
    // The record stays with the run: a later resume with the same number adds nothing.
    const again = await fit({ ...base, out, steps: 4, resume: true, workers: 1 });
    expect(again.options.workerChanges).toEqual([{ step: 2, previous: 2, workers: 1 }]);

    // A checkpoint written before the number of workers was recorded: it ran on one thread, and goes on so.
    const old = join(dir, 'par-old');
    await fit({ ...base, out: old, steps: 1, workers: 1 });
    const state = await loadCheckpoint(join(old, CHECKPOINT_FILE));
    delete (state.options as { workers?: number }).workers;
    await saveCheckpoint(join(old, CHECKPOINT_FILE), state);
    const oldEvents: FitEvent[] = [];
    const resumed = await fit({ ...base, workers: undefined, out: old, steps: 2, resume: true }, (e) => oldEvents.push(e));
    expect(oldEvents.find((e) => e.type === 'workers')).toEqual({ type: 'workers', workers: 1, step: 1 });
    expect(resumed.options.workerChanges).toBeUndefined();

    // More workers than crops a step is refused, naming the option.
    await expect(fit({ ...base, out: join(dir, 'par-too-many'), steps: 1, workers: 4 })).rejects.toMatchObject({
      code: 'KH_USAGE',
      message: expect.stringMatching(/4 workers for 3 crops/),
    });
  });
});

describe('fit: tune', () => {
  it('tuning on photos with a strong orange-red cast brings held-out error below the untuned model, keeping the best', async () => {
    // The starting point: the shipped model, or (before one ships) a model trained briefly on
    // natural-looking scenes.
    let start = DEFAULT_MODEL_DIR;
    if (
      !(await loadModel(DEFAULT_MODEL_DIR).then(
        () => true,
        () => false,
      ))
    ) {
      const natural = join(dir, 'natural');
      await writeScenes(natural, 6, 21);
      start = join(dir, 'start');
      await fit({ ...TINY, photos: [natural], out: start, steps: 8, learningRate: 3e-3, seed: 1 });
    }

    // Every colour pulled towards orange-red (a* +45, b* +40), at half its own strength.
    const castPhotos = join(dir, 'cast');
    await writeScenes(castPhotos, 8, 31, (a, b) => [45 + 0.5 * a, 40 + 0.5 * b]);
    const out = join(dir, 'tuned');
    const result = await fit({
      ...TINY,
      photos: [castPhotos],
      out,
      mode: 'tune',
      from: start,
      steps: 16,
      evalEvery: 4,
      learningRate: 1e-2,
      freezeEncoder: true,
      holdout: 0.25,
      seed: 2,
      // The frozen encoder travels to the worker threads once; only the decoder's weights each step.
      workers: 2,
    });
    expect(result.options.keep).toBe('best');
    expect(result.options.workers).toBe(2);
    expect(result.heldOut.after.ciede2000).toBeLessThan(result.heldOut.before.ciede2000 - 2);

    // The model kept is the best evaluation on the validation photos by the choice score (each logged
    // evaluation is marked best when it beats the best before it, the start's included, by MIN_IMPROVEMENT),
    // and its held-out figure is that of the model in the folder.
    const log = await readTrainingLog(out);
    let bestScore = choiceScore(result.validation.before);
    for (const e of log) {
      expect(e.best).toBe(choiceScore(e) < bestScore - MIN_IMPROVEMENT);
      if (e.best) bestScore = choiceScore(e);
    }
    const lowest = Math.min(...log.map(choiceScore));
    expect(choiceScore(result.validation.best)).toBeLessThanOrEqual(lowest + MIN_IMPROVEMENT);
    expect(result.heldOut.keptStep).toBe(log.filter((e) => e.best).at(-1)!.step);
    const set = await loadPhotoSet([castPhotos], { maxSide: TINY.photoSize, holdout: 0.25, validation: 0.1, seed: 2 });
    for (const e of log) expect(e.photos).toBe(set.validation.length);
    const model = await loadModel(out);
    const again = await evaluatePhotos(set.holdout, (L, w, h) => predict(model, L, w, h));
    expect(again.ciede2000).toBeCloseTo(result.heldOut.after.ciede2000, 4);
    // The encoder did not move; the decoder did.
    const original = await loadModel(start);
    const weightOf = (m: typeof model, layer: string): number[] => Array.from(m.network.getLayer(layer).getWeights()[0]!.dataSync());
    for (const layer of encoderLayerNames(model.network)) expect(weightOf(model, layer)).toEqual(weightOf(original, layer));
    expect(weightOf(model, 'logits')).not.toEqual(weightOf(original, 'logits'));
    original.network.dispose();
  });
});

describe('fit: the step kept', () => {
  // Figures shaped like a tune run's on the farm album's validation photos: CIEDE2000 lowest early, right hue
  // still rising after it (the numbers are this test's own).
  const early = { ciede2000: 3.63, rightHue: 64.8 };
  it('prefers a step whose right hue gained more than its CIEDE2000 lost, at 6 points of right hue per unit', () => {
    expect(RIGHT_HUE_PER_CIEDE2000).toBe(6);
    const later = { ciede2000: 3.8, rightHue: 70 };
    expect(choiceScore(later)).toBeLessThan(choiceScore(early) - MIN_IMPROVEMENT);
    expect(choiceScore(later)).toBeCloseTo(3.8 - 70 / 6, 10);
  });
  it('keeps the earlier step when the hues are bought with more CIEDE2000 than they are worth, or not at all', () => {
    expect(choiceScore({ ciede2000: 5.7, rightHue: 76 })).toBeGreaterThan(choiceScore(early));
    expect(choiceScore({ ciede2000: 3.5, rightHue: 50 })).toBeGreaterThan(choiceScore(early));
    // No clearly coloured pixel on the validation photos: CIEDE2000 alone.
    expect(choiceScore({ ciede2000: 3.5, rightHue: null })).toBe(3.5);
  });
});

describe('fit: honest tuning', () => {
  /** A small base model trained with a rebalancing other than the default, so inheriting it shows. */
  async function baseModel(): Promise<string> {
    const natural = join(dir, 'honest-natural');
    await writeScenes(natural, 6, 41);
    const base = join(dir, 'honest-base');
    await fit({ ...TINY, photos: [natural], out: base, steps: 4, learningRate: 3e-3, seed: 1, rebalance: 0.9 });
    return base;
  }

  it("a tuned model keeps its base's class weights and decoding: with weights that barely move, its held-out figures do not move", async () => {
    const base = await baseModel();
    const photos = join(dir, 'honest-cast');
    await writeScenes(photos, 10, 43, (a, b) => [45 + 0.5 * a, 40 + 0.5 * b]);
    const out = join(dir, 'honest-tuned');
    const events: FitEvent[] = [];
    const result = await fit(
      {
        ...TINY,
        keepCheckpoint: false,
        photos: [photos],
        out,
        mode: 'tune',
        from: base,
        steps: 50,
        evalEvery: 1,
        patience: 2,
        learningRate: 1e-12,
      },
      (e) => events.push(e),
    );
    const start = await loadModel(base);
    const tuned = await loadModel(out);
    expect(tuned.classWeights).toEqual(start.classWeights);
    expect(tuned.meta.decoding).toBe(start.meta.decoding);
    expect(result.options.rebalance).toBe(0.9);
    expect(result.options.classWeightsFrom).toBe('base');
    // Before and after decode alike: a learning rate of 1e-12 leaves the figures where they were.
    expect(Math.abs(result.heldOut.after.ciede2000 - result.heldOut.before.ciede2000)).toBeLessThan(1e-4);
    expect(Math.abs(result.heldOut.after.colourfulness - result.heldOut.before.colourfulness)).toBeLessThan(1e-3);

    // Early stopping: two evaluations without improvement since the start, and it says so.
    expect(result.stoppedBy).toBe('no-improvement');
    expect(result.steps).toBe(2);
    expect(result.heldOut.keptStep).toBe(0);
    expect(events.find((e) => e.type === 'stalled')).toMatchObject({ step: 2, bestStep: 0, patience: 2 });
    const last = events.filter((e) => e.type === 'step').at(-1);
    expect(last).toMatchObject({ best: { step: 0 } });

    // One record: the model's and the summary's steps, kept step and time agree; no checkpoint is left;
    // nothing names this machine's folders.
    const summaryText = await readFile(join(out, SUMMARY_FILE), 'utf8');
    const metaText = await readFile(join(out, 'kinhue-model.json'), 'utf8');
    const summary = JSON.parse(summaryText);
    const training = JSON.parse(metaText).training;
    expect([summary.steps, summary.heldOut.keptStep]).toEqual([2, 0]);
    expect([training.steps, training.keptStep, training.stoppedBy]).toEqual([2, 0, 'no-improvement']);
    expect(training.seconds).toBe(Math.round(summary.seconds));
    expect(training.heldOut.after).toEqual(summary.heldOut.after);
    expect(training.from).toEqual({ name: 'honest-base', weightsSha256: start.meta.weightsSha256 });
    expect(await readdir(out)).not.toContain(CHECKPOINT_FILE);
    expect(result.checkpointKept).toBe(false);
    for (const text of [summaryText, metaText]) expect(text).not.toContain(dir);

    // Validation and held-out photos are apart: the log rests on the validation photos only.
    expect(summary.validationFiles.length).toBe(2);
    expect(summary.holdoutFiles.filter((f: string) => summary.validationFiles.includes(f))).toEqual([]);
    for (const e of await readTrainingLog(out)) expect(e.photos).toBe(2);
    start.network.dispose();
    tuned.network.dispose();

    // A new rebalancing asked for replaces the weights, and the starting figures use them too.
    const rebalanced = await fit({
      ...TINY,
      keepCheckpoint: false,
      photos: [photos],
      out: join(dir, 'honest-rebalanced'),
      mode: 'tune',
      from: base,
      steps: 1,
      rebalance: 0.5,
      learningRate: 1e-12,
    });
    expect(rebalanced.options.classWeightsFrom).toBe('photos');
    expect(Math.abs(rebalanced.heldOut.after.ciede2000 - rebalanced.heldOut.before.ciede2000)).toBeLessThan(1e-4);
  }, 180_000);

  it('a checkpoint from before the validation split resumes with the same photos and order, choosing nothing on the held-out photos', async () => {
    const photos = join(dir, 'scenes');
    // validation 0 is how those runs split their photos; their checkpoints record no validation at all.
    const base = { ...TINY, photos: [photos], seed: 3, learningRate: 3e-3, validation: 0 };
    await fit({ ...base, out: join(dir, 'old-whole'), steps: 4 });
    const out = join(dir, 'old-split');
    await fit({ ...base, out, steps: 2 });
    const state = await loadCheckpoint(join(out, CHECKPOINT_FILE));
    delete (state.options as { validation?: number }).validation;
    delete (state.options as { patience?: number }).patience;
    delete (state.options as { classWeightsFrom?: string }).classWeightsFrom;
    await saveCheckpoint(join(out, CHECKPOINT_FILE), state);
    const events: FitEvent[] = [];
    const resumed = await fit({ ...TINY, photos: [photos], out, steps: 4, resume: true }, (e) => events.push(e));
    expect(resumed.photos.validation).toBe(0);
    // A train run keeps its last weights and never stops early: the held-out photos choose nothing.
    expect(events.some((e) => e.type === 'note' && /nothing is chosen on them/.test(e.message))).toBe(true);
    const whole = await weightsOf(join(dir, 'old-whole'));
    const split = await weightsOf(out);
    whole.weights.forEach((w, i) => expect(Buffer.from(split.weights[i]!.buffer).equals(Buffer.from(w.buffer))).toBe(true));
  });

  it('--validation 0 trains on every photo not held out, and is refused where a step would be chosen', async () => {
    const photos = join(dir, 'scenes');
    const base = { ...TINY, photos: [photos], seed: 3, learningRate: 3e-3, validation: 0 };
    const none = await fit({ ...base, out: join(dir, 'no-validation'), steps: 2 });
    const split = await fit({ ...base, validation: 0.25, out: join(dir, 'with-validation'), steps: 2 });
    expect(none.photos.validation).toBe(0);
    expect(none.photos.train).toBe(split.photos.train + split.photos.validation);
    expect(none.photos.holdout).toBe(split.photos.holdout);
    await expect(fit({ ...base, out: join(dir, 'no-validation-patience'), steps: 2, patience: 3 })).rejects.toMatchObject({
      message: expect.stringMatching(/--validation 0 leaves no photos to choose/),
    });
    await expect(
      fit({ ...base, mode: 'tune', from: DEFAULT_MODEL_DIR, out: join(dir, 'no-validation-tune'), steps: 2 }),
    ).rejects.toMatchObject({ message: expect.stringMatching(/--validation 0 leaves no photos to choose/) });
  });
});
