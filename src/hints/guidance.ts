/**
 * Hints files and reference photos brought to one scan: finds `<name>.hints.json`, reads the reference
 * (once per process), and returns the refine step that restore applies at the working size, with a record
 * of what was used for the scan's provenance. A bad hints file never stops a restore: the scan is restored
 * without hints and the record says why.
 */
import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import { basename, dirname, extname, join, resolve } from 'node:path';
import { resizePlane, type WorkingColour } from '../colour/index.js';
import { ErrorCodes, KinhueError, isKinhueError } from '../errors.js';
import { parseHints, type Hints } from './hints-file.js';
import { checkHintsSize, rasteriseHints } from './hint-raster.js';
import { PREDICTION_EDGE_SCALE, propagateHints } from './propagate.js';
import { loadReference, transferReference, type ReferenceSet } from './reference.js';
import type { SkinRecord } from './skin-prior.js';

export interface GuidanceOptions {
  /** Folder of hints files; searched before the scan's own folder. */
  hintsDir?: string;
  /** False: look for no hints file at all. Default true. */
  useHints?: boolean;
  /** A reference colour photograph, or a folder of them. */
  reference?: string;
  /** The scan's path relative to the run's inputs, to look for `<hintsDir>/<relative folder>/<name>.hints.json`. */
  relative?: string;
  /** See PropagationOptions.priorWeight. */
  priorWeight?: number;
}

/** What the provenance record says about hints and references. */
export interface GuidanceRecord {
  hints?: {
    file: string;
    /** False when the file was unusable; `ignored` says why. */
    used: boolean;
    ignored?: string;
    entries?: number;
    placeholders?: number;
    /** Working-size pixels held at a hinted colour. */
    pixels?: number;
    /** Hinted colours weakened to fit the scan's lightness (the first LISTED_ADJUSTMENTS). */
    adjustments?: string[];
    /** How many more were weakened than `adjustments` lists. */
    adjustmentsNotListed?: number;
    scaled?: string;
    iterations?: number;
    milliseconds?: number;
  };
  reference?: { files: string[]; samples: number; notes?: string[]; milliseconds?: number };
  /** The skin prior, when it found faces (applied before hints, which override it). */
  skin?: SkinRecord;
}

/** How many colour adjustments a record (and so the run's output) lists one by one; the rest are counted. */
export const LISTED_ADJUSTMENTS = 20;

export interface Guidance {
  /** The step to apply at the working size; absent when there is nothing to apply. */
  refine?: (work: WorkingColour) => void;
  /** Filled in as the refine step runs. */
  record: GuidanceRecord;
}

/**
 * Where a scan's hints file would be: `<name>.hints.json` for `<name>.<ext>`, in the hints folder
 * (under the scan's relative folder, then at its top) and then beside the scan.
 *
 * @example
 *   hintsCandidates('scans/barn.jpg'); // ['scans/barn.hints.json']
 */
export function hintsCandidates(source: string, hintsDir?: string, relative?: string): string[] {
  const name = `${basename(source, extname(source))}.hints.json`;
  const out: string[] = [];
  if (hintsDir) {
    if (relative && dirname(relative) !== '.') out.push(join(hintsDir, dirname(relative), name));
    out.push(join(hintsDir, name));
  }
  out.push(join(dirname(source), name));
  return out;
}

/**
 * Reads and checks a hints file. Throws KinhueError KH_BAD_HINTS (or KH_UNREADABLE when it cannot be read).
 *
 * @example
 *   const hints = await readHints('scans/barn.hints.json');
 */
export async function readHints(path: string): Promise<Hints> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (error) {
    throw new KinhueError(ErrorCodes.UNREADABLE, 'the hints file could not be read', { file: path, hint: 'check that it exists and is readable', cause: error });
  }
  return parseHints(text, path);
}

/**
 * SHA-256 of the hints file restore would use for a scan, or null when there is none, so a re-run
 * redoes a scan whose hints were edited since it was restored.
 *
 * @example
 *   await hintsFingerprint('scans/barn.jpg'); // 'a3f1...' or null
 */
export async function hintsFingerprint(source: string, hintsDir?: string, relative?: string): Promise<string | null> {
  const found = await findHints(hintsCandidates(source, hintsDir, relative));
  return found ? createHash('sha256').update(found.text).digest('hex') : null;
}

async function findHints(candidates: string[]): Promise<{ path: string; text: string } | undefined> {
  for (const path of candidates) {
    try {
      return { path, text: await readFile(path, 'utf8') };
    } catch (error) {
      if ((error as NodeJS.ErrnoException).code !== 'ENOENT') return { path, text: '' };
    }
  }
  return undefined;
}

const references = new Map<string, Promise<ReferenceSet>>();

/**
 * Reads a reference photo or folder once per process (a batch uses one reference for every scan).
 * Throws KH_BAD_HINTS for a grey reference or an empty folder, and the image module's codes for files
 * it cannot decode.
 *
 * @example
 *   const ref = await cachedReference('family/colour-1968.jpg');
 */
export function cachedReference(path: string): Promise<ReferenceSet> {
  const key = resolve(path);
  let pending = references.get(key);
  if (!pending) {
    pending = loadReference(path);
    pending.catch(() => references.delete(key));
    references.set(key, pending);
  }
  return pending;
}

/**
 * Everything hints and references will do to one scan of `width` x `height`: the refine step and its record.
 * A missing hints file means no hints; an unusable one is recorded as ignored, with its message.
 *
 * @example
 *   const guidance = await prepareGuidance('scans/barn.jpg', 3000, 2000, { reference: 'colour/' });
 *   await workingColour(L, w, h, model, { refine: guidance.refine });
 *   record.guidance = guidance.record;
 */
export async function prepareGuidance(source: string, width: number, height: number, options: GuidanceOptions = {}): Promise<Guidance> {
  const record: GuidanceRecord = {};
  let hints: Hints | undefined;
  const found = options.useHints === false ? undefined : await findHints(hintsCandidates(source, options.hintsDir, options.relative));
  if (found) {
    try {
      hints = found.text ? parseHints(found.text, found.path) : await readHints(found.path);
      const problem = checkHintsSize(hints, width, height);
      if (problem) {
        throw new KinhueError(ErrorCodes.BAD_HINTS, problem, { file: found.path, hint: 'make the hints file for this scan with `kinhue hints <scan> --force`, or fix its "image" size' });
      }
      record.hints = { file: found.path, used: true, entries: hints.entries.length, placeholders: hints.placeholders };
      if (hints.entries.length === 0) hints = undefined;
    } catch (error) {
      if (!isKinhueError(error)) throw error;
      record.hints = { file: found.path, used: false, ignored: error.describe() };
      hints = undefined;
    }
  }
  const reference = options.reference ? await cachedReference(options.reference) : undefined;
  if (reference) record.reference = { files: reference.files, samples: reference.L.length, ...(reference.notes.length ? { notes: reference.notes } : {}) };
  if (!hints && !reference) return { record };

  const refine = (work: WorkingColour): void => {
    const { width: w, height: h } = work;
    const confidence = work.confidenceWidth === w && work.confidenceHeight === h
      ? work.confidence
      : resizePlane(work.confidence, work.confidenceWidth, work.confidenceHeight, w, h);
    if (reference) {
      const t = performance.now();
      const transferred = transferReference(reference, work.L, w, h);
      // Where the model is sure, its colour stays; where it is not, the reference's colour takes over.
      for (let i = 0; i < w * h; i++) {
        const c = Math.min(1, Math.max(0, confidence[i]!));
        work.a[i] = c * work.a[i]! + (1 - c) * transferred.a[i]!;
        work.b[i] = c * work.b[i]! + (1 - c) * transferred.b[i]!;
      }
      record.reference!.milliseconds = Math.round(performance.now() - t);
    }
    if (hints) {
      const t = performance.now();
      const drawn = rasteriseHints(hints, work.L, w, h, width, height);
      // The prediction's own colour boundaries bound the hints too (our addition; see withPredictionEdges).
      const result = propagateHints({ width: w, height: h, L: work.L, a: work.a, b: work.b, confidence }, drawn.constraints,
        { priorWeight: options.priorWeight, predictionEdges: PREDICTION_EDGE_SCALE });
      work.a.set(result.a);
      work.b.set(result.b);
      Object.assign(record.hints!, {
        pixels: drawn.pixels,
        adjustments: drawn.adjustments.slice(0, LISTED_ADJUSTMENTS).map((adj) => adj.message),
        ...(drawn.adjustments.length > LISTED_ADJUSTMENTS ? { adjustmentsNotListed: drawn.adjustments.length - LISTED_ADJUSTMENTS } : {}),
        ...(drawn.scaled ? { scaled: drawn.scaled } : {}),
        iterations: result.iterations,
        milliseconds: Math.round(performance.now() - t),
      });
    }
  };
  return { refine, record };
}
