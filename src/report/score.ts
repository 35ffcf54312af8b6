/**
 * Scoring: take the colour out of colour originals (keep L* only), put it back with each model and
 * with two baselines, and measure each result against the original. The model rows use the same
 * in-memory colourisation as restore (batch/colouriseLightness), so a score describes what restore
 * would deliver at the same working size.
 */
import { mkdir, readdir } from 'node:fs/promises';
import { dirname, join, relative, resolve } from 'node:path';
import {
  clearlyColouredShare,
  colourfulness,
  hueAgreement,
  labToSrgb,
  meanAbError,
  meanCiede2000,
  psnr,
  srgbToLab,
  type LabPlanes,
} from '../colour/index.js';
import { cachedMemory, colouriseLightness, type ModelMemory } from '../batch/index.js';
import { ErrorCodes, InputError, KinhueError } from '../errors.js';
import { discoverInputs, InputGuard, writeFileAtomic } from '../files/index.js';
import { classifyTone, decodeImage, type Pixels } from '../image/index.js';
import { DEFAULT_MODEL_DIR, initBackend, loadFaceFinder, loadModel, type KinhueModel } from '../model/index.js';
import { VERSION } from '../version.js';
import { labStatistics, reinhardTransfer, type LabStatistics } from './reinhard.js';
import {
  HUE_FIGURES_NOTE,
  averageFigures,
  scoreToCsv,
  scoreToJson,
  type PhotoScore,
  type ScoreFailure,
  type ScoreFigures,
  type ScoreMethod,
  type ScoreReport,
} from './score-report.js';
import { recordedRebalance, trainingColourFor } from './training-colour.js';
import { modelVerdicts } from './verdict.js';

/** What to score. */
export interface ScoreOptions {
  /** Colour originals: files, folders (searched recursively) and glob patterns. */
  photos: string[];
  /** Model folders to compare. Default: the shipped model. */
  models?: string[];
  /** Long side in pixels at which the models run (as restore's --work-size). Default: each model's own. */
  workSize?: number;
  /** Annealed-mean temperature. Default: each model's own. */
  temperature?: number;
  /** How much class rebalancing least-CIEDE2000 decoding leaves in, 0 to 1. Default: each model's own. */
  vividness?: number;
  /** Give the faces found a skin hue, as restore does by default. Default true. */
  skin?: boolean;
  /**
   * A folder of colour photographs to use as the colour memory (as restore's `memory`): each model is
   * then scored twice, alone and with the memory.
   */
  memory?: string;
  /** Pixel limit per image; default the image module's. */
  maxPixels?: number;
  /**
   * Where writeScoreFiles will write the report: left out of the search, and refused (KH_OUTPUT_ON_INPUT)
   * before any work when a report file there would replace a photo or a model's file.
   */
  out?: string;
  onEvent?: (event: ScoreEvent) => void;
}

/** Progress while scoring. */
export type ScoreEvent = { type: 'photo'; done: number; total: number; file: string } | { type: 'failed'; failure: ScoreFailure };

const EXAMPLE = 'Example usage: kinhue score demo-photos/originals --model models/kinhue-base';

/** The original as 8-bit RGB (alpha dropped, 16 bits rounded), the form every figure is taken on. */
function rgb8(pixels: Pixels, file: string): Uint8Array {
  if (pixels.channels < 3) {
    throw new InputError(ErrorCodes.BAD_DATA, 'is a grey image; scoring needs colour originals', {
      file,
      hint: 'score colour photographs (their colour is taken out and put back); leave grey scans out',
    });
  }
  const n = pixels.width * pixels.height;
  const out = new Uint8Array(n * 3);
  const { data, channels } = pixels;
  const k = pixels.depth === 16 ? 255 / 65535 : 1;
  for (let i = 0, j = 0; i < n; i++, j += channels) {
    out[i * 3] = Math.round(data[j] * k);
    out[i * 3 + 1] = Math.round(data[j + 1] * k);
    out[i * 3 + 2] = Math.round(data[j + 2] * k);
  }
  return out;
}

/** Decodes one original and checks it is a colour photo. */
async function readOriginal(
  file: string,
  maxPixels?: number,
): Promise<{ rgb: Uint8Array; lab: LabPlanes; width: number; height: number; toned?: string }> {
  const { pixels } = await decodeImage(file, { maxPixels });
  const rgb = rgb8(pixels, file);
  const lab = srgbToLab(rgb, 3);
  const tone = classifyTone(lab);
  if (tone.kind === 'grey') {
    throw new InputError(ErrorCodes.BAD_DATA, 'is a grey photo (RGB without colour); scoring needs colour originals', {
      file,
      hint: 'score colour photographs (their colour is taken out and put back); leave grey scans out',
    });
  }
  // Colour photos of one dominant hue (a warm sunset, a brown calf) can look toned to the classifier,
  // so a toned verdict is reported, not refused.
  return { rgb, lab, width: pixels.width, height: pixels.height, ...(tone.kind === 'toned' ? { toned: tone.name ?? 'tinted' } : {}) };
}

/** Renders a candidate to 8-bit sRGB and measures it against the original. */
function measure(candidate: LabPlanes, original: { rgb: Uint8Array; lab: LabPlanes }): ScoreFigures {
  const rgb = labToSrgb(candidate, new Uint8Array(candidate.L.length * 3), 3);
  const seen = srgbToLab(rgb, 3);
  const { rightHue, falseColour, leftGrey } = hueAgreement(seen, original.lab);
  return {
    psnr: psnr(rgb, original.rgb),
    ciede2000: meanCiede2000(seen, original.lab),
    abError: meanAbError(seen, original.lab),
    colourfulness: colourfulness(rgb, 3),
    rightHue,
    falseColour,
    leftGrey,
  };
}

function failureOf(file: string, error: KinhueError): ScoreFailure {
  return { file, code: error.code, message: error.message, ...(error.hint ? { hint: error.hint } : {}) };
}

/** Pooled a*b* statistics of the photos, for models that record no training colour (one extra decode each). */
async function pooledStatistics(files: { path: string }[], maxPixels?: number): Promise<LabStatistics> {
  let n = 0;
  const sum = [0, 0, 0],
    squares = [0, 0, 0];
  for (const { path } of files) {
    const lab = await readOriginal(path, maxPixels).then(
      (o) => o.lab,
      () => undefined,
    );
    if (!lab) continue;
    const s = labStatistics(lab);
    const m = lab.L.length;
    for (let c = 0; c < 3; c++) {
      sum[c] += s.mean[c] * m;
      squares[c] += (s.sd[c] ** 2 + s.mean[c] ** 2) * m;
    }
    n += m;
  }
  if (n === 0) return { mean: [NaN, 0, 0], sd: [NaN, 0, 0] };
  const mean = sum.map((v) => v / n) as [number, number, number];
  const sd = squares.map((v, c) => Math.sqrt(Math.max(0, v / n - mean[c] ** 2))) as [number, number, number];
  return { mean: [NaN, mean[1], mean[2]], sd: [NaN, sd[1], sd[2]] };
}

/** Short, distinct labels for the models: their names, with the folder added where two names clash. */
function modelLabels(models: KinhueModel[]): string[] {
  const names = models.map((m) => m.meta.name);
  return models.map((m, i) =>
    names.indexOf(names[i]) !== names.lastIndexOf(names[i]) ? `${names[i]} (${relative('.', m.dir) || m.dir})` : names[i],
  );
}

/**
 * Scores models against colour originals, beside a grey and a Reinhard colour-transfer baseline.
 * Files that cannot be scored are listed in `failures`; a bad model folder throws ModelError.
 * @example
 *   const report = await score({ photos: ['demo-photos/originals'], models: ['models/kinhue-base'] });
 *   console.log(formatScoreTable(report));
 */
export async function score(options: ScoreOptions): Promise<ScoreReport> {
  const discovered = await discoverInputs(options.photos, { outDir: options.out, example: EXAMPLE });
  const files = discovered.files;
  const dirs = options.models?.length ? options.models : [DEFAULT_MODEL_DIR];
  if (options.out) {
    const guard = await InputGuard.of(
      files.map((f) => f.path),
      { hint: 'choose an --out folder that is not a photo or model folder, nor a link to one' },
    );
    for (const dir of dirs) for (const name of await readdir(dir).catch(() => [] as string[])) await guard.add(join(dir, name));
    for (const name of [SCORE_CSV, SCORE_JSON]) await guard.check(join(options.out, name));
  }

  await initBackend();
  const models: KinhueModel[] = [];
  try {
    for (const dir of dirs) models.push(await loadModel(dir));
    const faceFinder = options.skin === false ? undefined : await loadFaceFinder();
    let pooled: LabStatistics | undefined;
    const needsPool = models.some((m) => m.meta.classWeights.length !== m.bins.count);
    if (needsPool) pooled = await pooledStatistics(files, options.maxPixels);
    const labels = modelLabels(models);
    const methods: ScoreMethod[] = [{ id: 'grey', label: 'grey (L* only)', kind: 'grey' }];
    const modelOf = new Map<string, { model: KinhueModel; memory?: ModelMemory }>();
    for (const [i, model] of models.entries()) {
      modelOf.set(`model:${i + 1}`, { model });
      methods.push({
        id: `transfer:${i + 1}`,
        label: `Reinhard transfer (${labels[i]})`,
        kind: 'transfer',
        model: model.dir,
        target: trainingColourFor(model.meta.classWeights, model.bins, () => pooled!, recordedRebalance(model.meta.training)),
      });
      methods.push({
        id: `model:${i + 1}`,
        label: `model ${labels[i]}`,
        kind: 'model',
        model: model.dir,
        weightsHash: model.meta.weightsSha256,
      });
      if (options.memory) {
        const memory = await cachedMemory(model, options.memory, options.workSize ?? model.meta.workingSize, options.maxPixels);
        modelOf.set(`memory:${i + 1}`, { model, memory });
        methods.push({
          id: `memory:${i + 1}`,
          label: `model ${labels[i]} + memory`,
          kind: 'model',
          model: model.dir,
          weightsHash: model.meta.weightsSha256,
          memory: { sha256: memory.sha256, photos: memory.photos },
        });
      }
    }

    const photos: PhotoScore[] = [];
    // Folders that could not be searched and links that lead nowhere are listed like unreadable files.
    const failures: ScoreFailure[] = discovered.problems.map((p) => ({ file: p.rel, code: p.code, message: p.message, hint: p.hint }));
    const toned: string[] = [];
    for (let k = 0; k < files.length; k++) {
      const { path, rel } = files[k];
      try {
        const original = await readOriginal(path, options.maxPixels);
        const { width, height, lab } = original;
        const grey: LabPlanes = { L: lab.L, a: new Float32Array(lab.L.length), b: new Float32Array(lab.L.length) };
        const figures: Record<string, ScoreFigures> = {};
        for (const method of methods) {
          if (method.kind === 'grey') figures[method.id] = measure(grey, original);
          else if (method.kind === 'transfer') {
            figures[method.id] = measure(reinhardTransfer(grey, method.target!.statistics, { channels: ['a', 'b'] }), original);
          } else {
            const { model, memory } = modelOf.get(method.id)!;
            const workSize = options.workSize ?? model.meta.workingSize;
            const { a, b } = await colouriseLightness(lab.L, width, height, model, {
              workSize,
              temperature: options.temperature,
              vividness: options.vividness,
              faceFinder,
              memory,
            });
            figures[method.id] = measure({ L: lab.L, a, b }, original);
          }
        }
        photos.push({
          file: rel,
          width,
          height,
          originalColourfulness: colourfulness(original.rgb, 3),
          clearlyColoured: clearlyColouredShare(lab),
          figures,
        });
        if (original.toned) toned.push(`${rel} (${original.toned})`);
      } catch (error) {
        if (!(error instanceof KinhueError)) throw error;
        const failure = failureOf(rel, error);
        failures.push(failure);
        options.onEvent?.({ type: 'failed', failure });
      }
      options.onEvent?.({ type: 'photo', done: k + 1, total: files.length, file: rel });
    }

    const transfer = methods.filter((m) => m.kind === 'transfer');
    const average = averageFigures(photos, methods);
    const notes = [
      "Each original's colour is taken out (its CIELAB L* kept, a* = b* = 0) and put back by each method; L* is never changed.",
      'Figures compare the 8-bit sRGB rendering of each result with the original rounded to 8 bits; averages count each photo once (PSNR averaged in dB).',
      `Models run as restore runs them: at ${options.workSize ? `a working size of ${options.workSize} px` : "each model's own working size"} (long side), ${options.vividness === undefined ? "each model's own vividness" : `vividness ${options.vividness}`}, colour carried to full size edge-aware${options.skin === false ? ', without the skin prior' : ', faces found given a skin hue'}.`,
      `${HUE_FIGURES_NOTE} Averages of right hue and left grey skip photos with no clearly coloured pixel.`,
      "Reinhard transfer: the global statistics matching of Reinhard et al. 2001, applied in CIELAB rather than the paper's l-alpha-beta space, to a*b* only; a grey input has no a*b* spread, so it becomes the target's mean colour everywhere.",
      ...transfer.map(
        (m) =>
          `Target of ${m.label}: ${m.target!.description} (a* ${m.target!.statistics.mean[1].toFixed(2)}, b* ${m.target!.statistics.mean[2].toFixed(2)}).`,
      ),
      ...(options.memory ? [memoryNote(options.memory, files)] : []),
      ...(toned.length
        ? [
            `Colour of a single hue, as in a toned monochrome print: ${toned.join(', ')}. Scored; check these are colour photographs, not tinted prints.`,
          ]
        : []),
      ...discovered.notes,
    ];
    return {
      kind: 'kinhue-score',
      version: VERSION,
      created: new Date().toISOString(),
      methods,
      photos,
      failures,
      average,
      verdicts: average ? modelVerdicts(methods, average.figures) : [],
      notes,
    };
  } finally {
    for (const model of models) model.network.dispose();
  }
}

/** What the memory rows are, and a warning when a scored photo is one of the memory's own. */
function memoryNote(folder: string, files: { path: string }[]): string {
  const dir = resolve(folder);
  const own = files.filter((f) => dirname(resolve(f.path)) === dir).length;
  return (
    `"+ memory": the model with the colour memory of ${folder} (restore's --memory), applied after the skin prior.` +
    (own
      ? ` ${own} scored photo${own === 1 ? ' is' : 's are'} in the memory itself: those figures flatter it; score photos the memory does not hold.`
      : '')
  );
}

/** The two files `--out` writes. */
export const SCORE_CSV = 'kinhue-score.csv';
export const SCORE_JSON = 'kinhue-score.json';

/**
 * Writes `kinhue-score.csv` and `kinhue-score.json` into `dir` (created when missing), each atomically.
 * @example
 *   const { csv, json } = await writeScoreFiles(report, 'scores');
 */
export async function writeScoreFiles(report: ScoreReport, dir: string): Promise<{ csv: string; json: string }> {
  try {
    await mkdir(dir, { recursive: true });
  } catch (error) {
    throw new KinhueError(ErrorCodes.WRITE_FAILED, 'the output folder could not be made', {
      file: dir,
      hint: 'choose a folder you can write to',
      cause: error,
    });
  }
  const csv = join(dir, SCORE_CSV);
  const json = join(dir, SCORE_JSON);
  await writeFileAtomic(csv, scoreToCsv(report));
  await writeFileAtomic(json, scoreToJson(report));
  return { csv, json };
}
