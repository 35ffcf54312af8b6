/**
 * The photo set a training run learns from: every file under the given paths that decodes, kept in
 * memory as small CIELAB planes, with grey and toned prints set aside and a held-out part for
 * evaluation. Bad data stops the run before any model is written.
 */
import { readdir, stat } from 'node:fs/promises';
import { basename, join, relative, resolve, sep } from 'node:path';
import pLimit from 'p-limit';
import { downscaleToFloatRgb, srgbToLab } from '../colour/index.js';
import { ErrorCodes, KinhueError } from '../errors.js';
import { hasImageExtension } from '../files/index.js';
import { classifyTone, decodeImage } from '../image/index.js';
import { Random } from './random.js';

/** One colour photo, downscaled, as CIELAB planes. */
export interface Photo {
  /** The path as found (absolute). */
  file: string;
  /** The path below the folder given, led by that folder's name (a file given alone: its name): no machine path. */
  name: string;
  width: number;
  height: number;
  L: Float32Array;
  a: Float32Array;
  b: Float32Array;
}

export interface PhotoSetOptions {
  /** Long side the photos are kept at, in pixels. */
  maxSide: number;
  /** Fraction of the colour photos held out for evaluation (at least 2 photos). Default 0.1. */
  holdout?: number;
  /**
   * Fraction of the colour photos set aside for validation, apart from the held-out ones (at least 2
   * photos). Default 0: none, as in runs from before the split (their held-out and training photos stay
   * the same whatever this fraction).
   */
  validation?: number;
  /** Seed of the held-out split. */
  seed: number;
  /** Files under this folder are not read (the run's own output folder). */
  exclude?: string;
  /** Decodes running at once. Default 2. */
  concurrency?: number;
  /** Called after each file is read, for progress. */
  onFile?: (done: number, total: number, file: string) => void;
}

/** A file that could not be read, and why. */
export interface SkippedFile {
  file: string;
  reason: string;
}

export interface PhotoSet {
  train: Photo[];
  /** Photos that choose the step kept and when to stop (empty without a validation fraction). */
  validation: Photo[];
  holdout: Photo[];
  /** Files sharp could decode but that are grey or toned monochrome (no colour to learn). */
  grey: string[];
  /** Files with an image name that failed to decode. */
  unreadable: SkippedFile[];
  /** Other files found in the folders (not images; ignored). */
  otherFiles: number;
}

/** The fewest colour photos a run accepts: two held out, two for validation, two to learn from. */
export const MIN_COLOUR_PHOTOS = 6;

/** The fewest of a run from before the validation split (two held out, two to learn from). */
const MIN_WITHOUT_VALIDATION = 4;

/**
 * Reads every photo under `paths` (files or folders, folders searched recursively).
 * Throws KinhueError KH_BAD_DATA when nothing usable is found.
 * @example
 *   const set = await loadPhotoSet(['photos/'], { maxSide: 384, seed: 1 });
 *   console.log(set.train.length, set.holdout.length, set.grey.length);
 */
export async function loadPhotoSet(paths: string[], options: PhotoSetOptions): Promise<PhotoSet> {
  const { files } = await findFiles(paths, options.exclude);
  const where = paths.join(', ');
  if (files.length === 0) {
    throw new KinhueError(ErrorCodes.BAD_DATA, 'no files found', {
      file: where,
      hint: 'point kinhue at a folder of colour photographs (JPEG, PNG, TIFF or WebP).',
    });
  }

  const limit = pLimit(options.concurrency ?? 2);
  const unreadable: SkippedFile[] = [];
  const grey: string[] = [];
  let skippedOther = 0;
  let done = 0;
  const photos = (
    await Promise.all(
      files.map(({ file, name, named }) =>
        limit(async (): Promise<Photo | undefined> => {
          try {
            return await readPhoto(file, name, options.maxSide, grey);
          } catch (error) {
            // A file without an image name that does not decode is simply not a photo.
            if (named) unreadable.push({ file, reason: error instanceof KinhueError ? error.message : String(error) });
            else skippedOther++;
            return undefined;
          } finally {
            options.onFile?.(++done, files.length, file);
          }
        }),
      ),
    )
  ).filter((p): p is Photo => p !== undefined);

  unreadable.sort((x, y) => (x.file < y.file ? -1 : 1));
  grey.sort();
  const validating = (options.validation ?? 0) > 0;
  const needed = validating ? MIN_COLOUR_PHOTOS : MIN_WITHOUT_VALIDATION;
  if (photos.length < needed) {
    const found =
      `${photos.length} colour photo${photos.length === 1 ? '' : 's'} usable` +
      (grey.length ? `, ${grey.length} grey or toned skipped` : '') +
      (unreadable.length
        ? `, ${unreadable.length} unreadable (${unreadable
            .slice(0, 3)
            .map((u) => basename(u.file))
            .join(', ')}${unreadable.length > 3 ? ', ...' : ''})`
        : '');
    throw new KinhueError(ErrorCodes.BAD_DATA, `too few colour photos to train on: ${found}; at least ${needed} are needed`, {
      file: where,
      hint:
        photos.length === 0 && unreadable.length > 0 && grey.length === 0
          ? 'none of the images could be decoded: check they are complete JPEG, PNG, TIFF or WebP files.'
          : `add colour photographs (at least ${needed}; a few dozen or more work best).`,
    });
  }

  const { train: rest, holdout } = splitHoldout(photos, options.holdout ?? 0.1, options.seed);
  // The validation photos come out of the rest with a generator of their own: the held-out photos are
  // those a run without validation would hold out.
  const { train, holdout: validation } = validating
    ? splitHoldout(rest, (options.validation! * photos.length) / rest.length, options.seed, VALIDATION_STREAM)
    : { train: rest, holdout: [] };
  return { train, validation, holdout, grey, unreadable, otherFiles: skippedOther };
}

/** Constants mixed into the seed of each split's generator (our own). */
const HOLDOUT_STREAM = 0x68f1d3a5;
const VALIDATION_STREAM = 0x2c9e4b17;

/**
 * Splits photos (in path order) into training and held-out parts with a seeded shuffle;
 * at least 2 held out and at least 2 left to train on.
 * @example
 *   const { train, holdout } = splitHoldout(photos, 0.1, 1);
 */
export function splitHoldout<T extends { file: string }>(
  photos: T[],
  fraction: number,
  seed: number,
  stream = HOLDOUT_STREAM,
): { train: T[]; holdout: T[] } {
  const sorted = [...photos].sort((x, y) => (x.file < y.file ? -1 : x.file > y.file ? 1 : 0));
  // A generator of its own, so the split does not depend on anything else the run draws.
  const rng = new Random((seed ^ stream) >>> 0);
  rng.shuffle(sorted);
  const count = Math.min(sorted.length - 2, Math.max(2, Math.round(sorted.length * fraction)));
  const holdout = sorted.slice(0, count).sort((x, y) => (x.file < y.file ? -1 : 1));
  const train = sorted.slice(count).sort((x, y) => (x.file < y.file ? -1 : 1));
  return { train, holdout };
}

async function readPhoto(file: string, name: string, maxSide: number, grey: string[]): Promise<Photo | undefined> {
  const { pixels } = await decodeImage(file);
  const small = downscaleToFloatRgb(pixels, maxSide);
  const lab = srgbToLab(small.data, 3);
  const tone = classifyTone(lab);
  if (tone.kind !== 'colour') {
    grey.push(file);
    return undefined;
  }
  return { file, name, width: small.width, height: small.height, L: lab.L, a: lab.a, b: lab.b };
}

interface FoundFile {
  file: string;
  /** As Photo.name. */
  name: string;
  /** Named like an image (or named explicitly on the command line). */
  named: boolean;
}

async function findFiles(paths: string[], exclude?: string): Promise<{ files: FoundFile[] }> {
  const files: FoundFile[] = [];
  const skip = exclude ? resolve(exclude) : undefined;
  const walk = async (dir: string, root: string): Promise<void> => {
    if (skip && (dir === skip || dir.startsWith(skip + sep))) return;
    const entries = await readdir(dir, { withFileTypes: true });
    for (const entry of entries.sort((x, y) => (x.name < y.name ? -1 : 1))) {
      if (entry.name.startsWith('.')) continue;
      const full = join(dir, entry.name);
      if (entry.isDirectory()) await walk(full, root);
      else if (entry.isFile()) {
        // Every file is tried (a scanner may write photos without an extension); only those named
        // like images count as unreadable when they fail.
        files.push({ file: full, name: join(basename(root), relative(root, full)), named: hasImageExtension(entry.name) });
      }
    }
  };
  for (const path of paths) {
    const full = resolve(path);
    let info;
    try {
      info = await stat(full);
    } catch (error) {
      throw new KinhueError(ErrorCodes.UNREADABLE, 'not found or not readable', {
        file: path,
        hint: 'check the path of the photo folder.',
        cause: error,
      });
    }
    if (info.isDirectory()) await walk(full, full);
    else files.push({ file: full, name: basename(full), named: true });
  }
  // One entry per file even when paths overlap.
  const seen = new Set<string>();
  return { files: files.filter((f) => (seen.has(f.file) ? false : (seen.add(f.file), true))) };
}
