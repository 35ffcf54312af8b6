/**
 * The photo set a training run learns from: every file under the given paths that decodes, kept in
 * memory as small CIELAB planes, with grey and toned prints set aside and a held-out part for
 * evaluation. Bad data stops the run before any model is written.
 */
import { readdir, stat } from 'node:fs/promises';
import { basename, join, resolve, sep } from 'node:path';
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
  holdout: Photo[];
  /** Files sharp could decode but that are grey or toned monochrome (no colour to learn). */
  grey: string[];
  /** Files with an image name that failed to decode. */
  unreadable: SkippedFile[];
  /** Other files found in the folders (not images; ignored). */
  otherFiles: number;
}

/** The fewest colour photos a run accepts: two held out, two to learn from. */
export const MIN_COLOUR_PHOTOS = 4;

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
      files.map(({ file, named }) =>
        limit(async (): Promise<Photo | undefined> => {
          try {
            return await readPhoto(file, options.maxSide, grey);
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
  if (photos.length < MIN_COLOUR_PHOTOS) {
    const found =
      `${photos.length} colour photo${photos.length === 1 ? '' : 's'} usable` +
      (grey.length ? `, ${grey.length} grey or toned skipped` : '') +
      (unreadable.length ? `, ${unreadable.length} unreadable (${unreadable.slice(0, 3).map((u) => basename(u.file)).join(', ')}${unreadable.length > 3 ? ', ...' : ''})` : '');
    throw new KinhueError(ErrorCodes.BAD_DATA, `too few colour photos to train on: ${found}; at least ${MIN_COLOUR_PHOTOS} are needed`, {
      file: where,
      hint: photos.length === 0 && unreadable.length > 0 && grey.length === 0
        ? 'none of the images could be decoded: check they are complete JPEG, PNG, TIFF or WebP files.'
        : `add colour photographs (at least ${MIN_COLOUR_PHOTOS}; a few dozen or more work best).`,
    });
  }

  const { train, holdout } = splitHoldout(photos, options.holdout ?? 0.1, options.seed);
  return { train, holdout, grey, unreadable, otherFiles: skippedOther };
}

/**
 * Splits photos (in path order) into training and held-out parts with a seeded shuffle;
 * at least 2 held out and at least 2 left to train on.
 * @example
 *   const { train, holdout } = splitHoldout(photos, 0.1, 1);
 */
export function splitHoldout<T extends { file: string }>(photos: T[], fraction: number, seed: number): { train: T[]; holdout: T[] } {
  const sorted = [...photos].sort((x, y) => (x.file < y.file ? -1 : x.file > y.file ? 1 : 0));
  // A generator of its own, so the split does not depend on anything else the run draws.
  const rng = new Random((seed ^ 0x68f1d3a5) >>> 0);
  rng.shuffle(sorted);
  const count = Math.min(sorted.length - 2, Math.max(2, Math.round(sorted.length * fraction)));
  const holdout = sorted.slice(0, count).sort((x, y) => (x.file < y.file ? -1 : 1));
  const train = sorted.slice(count).sort((x, y) => (x.file < y.file ? -1 : 1));
  return { train, holdout };
}

async function readPhoto(file: string, maxSide: number, grey: string[]): Promise<Photo | undefined> {
  const { pixels } = await decodeImage(file);
  const small = downscaleToFloatRgb(pixels, maxSide);
  const lab = srgbToLab(small.data, 3);
  const tone = classifyTone(lab);
  if (tone.kind !== 'colour') {
    grey.push(file);
    return undefined;
  }
  return { file, width: small.width, height: small.height, L: lab.L, a: lab.a, b: lab.b };
}

interface FoundFile {
  file: string;
  /** Named like an image (or named explicitly on the command line). */
  named: boolean;
}

async function findFiles(paths: string[], exclude?: string): Promise<{ files: FoundFile[] }> {
  const files: FoundFile[] = [];
  const skip = exclude ? resolve(exclude) : undefined;
  const walk = async (dir: string): Promise<void> => {
    if (skip && (dir === skip || dir.startsWith(skip + sep))) return;
    const entries = await readdir(dir, { withFileTypes: true });
    for (const entry of entries.sort((x, y) => (x.name < y.name ? -1 : 1))) {
      if (entry.name.startsWith('.')) continue;
      const full = join(dir, entry.name);
      if (entry.isDirectory()) await walk(full);
      else if (entry.isFile()) {
        // Every file is tried (a scanner may write photos without an extension); only those named
        // like images count as unreadable when they fail.
        files.push({ file: full, named: hasImageExtension(entry.name) });
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
    if (info.isDirectory()) await walk(full);
    else files.push({ file: full, named: true });
  }
  // One entry per file even when paths overlap.
  const seen = new Set<string>();
  return { files: files.filter((f) => (seen.has(f.file) ? false : (seen.add(f.file), true))) };
}
