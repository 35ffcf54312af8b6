/**
 * The colour memory of a folder of the archive's own colour photographs (model/colour-memory.ts):
 * the photos read once per process at the working size, then remembered through each model that colours
 * with them (the features are the model's own, so a memory belongs to one model and one working size).
 */
import { createHash } from 'node:crypto';
import { stat } from 'node:fs/promises';
import { basename, resolve } from 'node:path';
import { shrinkPlane, type LabPlanes } from '../colour/index.js';
import { ErrorCodes, InputError } from '../errors.js';
import { folderImages } from '../files/index.js';
import { classifyTone, decodeImage } from '../image/index.js';
import { predict, rememberCells, type ColourMemory, type KinhueModel } from '../model/index.js';
import { workingSize } from './colourise.js';
import { fileSha256 } from './hash.js';
import { workingLab } from './working-lab.js';

/** The memory's photographs at one working size, and what identifies them. */
export interface MemoryPhotos {
  /** Absolute folder. */
  folder: string;
  /** File names in the folder, sorted. */
  files: string[];
  /** SHA-256 of the names and each file's SHA-256: changes when any photo does. */
  sha256: string;
  workSize: number;
  photos: Array<{ lab: LabPlanes; width: number; height: number }>;
}

function refuse(file: string, message: string, hint: string): InputError {
  return new InputError(ErrorCodes.BAD_DATA, message, { file, hint });
}

/**
 * Reads every image in a folder (not its subfolders) at the working size, refusing a folder without
 * images and a grey photo (it has no colour to remember).
 * @example
 *   const photos = await readMemoryPhotos('farm-album/tune', 512);
 */
export async function readMemoryPhotos(folder: string, workSize: number, maxPixels?: number): Promise<MemoryPhotos> {
  const dir = resolve(folder);
  const info = await stat(dir).catch(() => undefined);
  if (!info?.isDirectory()) {
    throw refuse(
      dir,
      info ? 'the memory must be a folder of colour photographs' : 'the memory folder was not found',
      'give a folder of colour photographs of the same people and places',
    );
  }
  const paths = await folderImages(dir);
  const files = paths.map((path) => basename(path));
  if (files.length === 0) throw refuse(dir, 'the memory folder holds no images', 'put colour photographs (JPEG, PNG, TIFF, WebP) in it');
  const digest = createHash('sha256');
  const photos: MemoryPhotos['photos'] = [];
  for (const [k, file] of paths.entries()) {
    digest.update(`${files[k]}\0${await fileSha256(file)}\n`);
    const { pixels } = await decodeImage(file, { maxPixels });
    const ws = workingSize(pixels.width, pixels.height, workSize);
    const lab = workingLab(pixels, ws.width, ws.height);
    if (pixels.channels < 3 || classifyTone(lab).kind === 'grey') {
      throw refuse(
        file,
        'is a grey photograph; the memory needs colour photographs',
        'take it out of the memory folder, or use its colour original',
      );
    }
    photos.push({ lab, width: ws.width, height: ws.height });
  }
  return { folder: dir, files, sha256: digest.digest('hex'), workSize, photos };
}

const readings = new Map<string, Promise<MemoryPhotos>>();

/**
 * readMemoryPhotos once per process for a folder and working size (every scan of a run uses one memory).
 * @example
 *   const photos = await cachedMemoryPhotos('farm-album/tune', 512);
 */
export function cachedMemoryPhotos(folder: string, workSize: number, maxPixels?: number): Promise<MemoryPhotos> {
  const key = `${resolve(folder)}\0${workSize}`;
  let pending = readings.get(key);
  if (!pending) {
    pending = readMemoryPhotos(folder, workSize, maxPixels);
    pending.catch(() => readings.delete(key));
    readings.set(key, pending);
  }
  return pending;
}

/** A memory as a model remembers it, with what its record names. */
export interface ModelMemory {
  memory: ColourMemory;
  sha256: string;
  photos: number;
}

/**
 * The photos remembered through a model: its features at each cell of its output grid, with the photo's
 * a*b* averaged over the same cell.
 * @example
 *   const memory = rememberPhotos(model, await cachedMemoryPhotos('farm-album/tune', 512));
 */
export function rememberPhotos(model: KinhueModel, photos: MemoryPhotos): ModelMemory {
  const cells = photos.photos.map(({ lab, width, height }) => {
    const p = predict(model, lab.L, width, height, { cellFeatures: true });
    return {
      features: p.features!.data,
      dims: p.features!.dims,
      a: shrinkPlane(lab.a, width, height, p.width, p.height),
      b: shrinkPlane(lab.b, width, height, p.width, p.height),
    };
  });
  return { memory: rememberCells(cells), sha256: photos.sha256, photos: photos.files.length };
}

const remembered = new WeakMap<KinhueModel, Map<string, ModelMemory>>();

/**
 * rememberPhotos once per model and memory (a restore worker colours every scan with one).
 * @example
 *   const memory = await cachedMemory(model, 'farm-album/tune', 512);
 */
export async function cachedMemory(model: KinhueModel, folder: string, workSize: number, maxPixels?: number): Promise<ModelMemory> {
  const photos = await cachedMemoryPhotos(folder, workSize, maxPixels);
  let byModel = remembered.get(model);
  if (!byModel) remembered.set(model, (byModel = new Map()));
  const key = `${photos.folder}\0${workSize}`;
  let memory = byModel.get(key);
  if (!memory) byModel.set(key, (memory = rememberPhotos(model, photos)));
  return memory;
}
