/**
 * Hints files and reference photos as guides for one scan: finds `<name>.hints.json` (read once, so the
 * hash restore records is that of the text it uses), reads the reference (once per process), and returns
 * the guides restore applies at the working size, with the record of what was used for the scan's
 * provenance. A bad hints file never stops a restore: the scan is restored without hints and the record
 * says why.
 */
import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import { basename, dirname, extname, join, resolve } from 'node:path';
import type { Guide, GuideInput } from '../colour/index.js';
import { ErrorCodes, KinhueError, isKinhueError } from '../errors.js';
import { parseHints, type Hints } from './hints-file.js';
import { checkHintsSize, rasteriseHints } from './hint-raster.js';
import { PREDICTION_EDGE_SCALE, propagateHints } from './propagate.js';
import { loadReference, transferReference, type ReferenceSet } from './reference.js';
import type { SkinRecord } from './skin-prior.js';

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
  /**
   * The colour memory (batch/memory.ts): the SHA-256 of its photos, how many, the cells remembered, and the
   * working-size pixels whose a*b* it changed noticeably, also as a share of all.
   */
  memory?: { sha256: string; photos: number; cells: number; pixels: number; share: number; milliseconds?: number };
}

/** How many colour adjustments a record (and so the run's output) lists one by one; the rest are counted. */
export const LISTED_ADJUSTMENTS = 20;

/** A scan's hints file as found: its text (null when it could not be read) and the SHA-256 of that text. */
export interface HintsSource {
  path: string;
  text: string | null;
  sha256: string;
}

/** Where a scan's hints are looked for. */
export interface HintsSearch {
  /** Folder of hints files; searched before the scan's own folder. */
  hintsDir?: string;
  /** The scan's path relative to the run's inputs, to look for `<hintsDir>/<relative folder>/<name>.hints.json`. */
  relative?: string;
}

/** The hints and reference photos for one scan. */
export interface GuidanceSources {
  /** The scan's hints file, or null for none. */
  hints: HintsSource | null;
  /** A reference colour photograph, or a folder of them. */
  reference?: string;
  /** See PropagationOptions.priorWeight. */
  priorWeight?: number;
}

export interface Guidance {
  /** In the order they apply; empty when there is nothing to apply. */
  guides: Guide[];
  /** What is known before they run; each guide's output record is added to its own entry. */
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
    throw new KinhueError(ErrorCodes.UNREADABLE, 'the hints file could not be read', {
      file: path,
      hint: 'check that it exists and is readable',
      cause: error,
    });
  }
  return parseHints(text, path);
}

/**
 * The hints file restore uses for a scan, read once: null when there is none. A file that exists but
 * cannot be read is returned with no text (and the SHA-256 of no text), to be reported as not used.
 *
 * @example
 *   await findHints('scans/barn.jpg'); // { path: 'scans/barn.hints.json', text: '{...}', sha256: 'a3f1...' } or null
 */
export async function findHints(source: string, search: HintsSearch = {}): Promise<HintsSource | null> {
  for (const path of hintsCandidates(source, search.hintsDir, search.relative)) {
    try {
      const text = await readFile(path, 'utf8');
      return { path, text, sha256: sha256(text) };
    } catch (error) {
      if ((error as NodeJS.ErrnoException).code !== 'ENOENT') return { path, text: null, sha256: sha256('') };
    }
  }
  return null;
}

function sha256(text: string): string {
  return createHash('sha256').update(text).digest('hex');
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
 * The guides for one scan of `width` x `height` (reference photos, then hints) and their record. An
 * unusable hints file is recorded as ignored, with its message.
 *
 * @example
 *   const { guides, record } = await prepareGuides({ hints: await findHints('scans/barn.jpg'), reference: 'colour/' }, 3000, 2000);
 */
export async function prepareGuides(sources: GuidanceSources, width: number, height: number): Promise<Guidance> {
  const record: GuidanceRecord = {};
  const found = sources.hints;
  let hints: Hints | undefined;
  if (found) {
    try {
      hints = found.text !== null ? parseHints(found.text, found.path) : await readHints(found.path);
      const problem = checkHintsSize(hints, width, height);
      if (problem) {
        throw new KinhueError(ErrorCodes.BAD_HINTS, problem, {
          file: found.path,
          hint: 'make the hints file for this scan with `kinhue hints <scan> --force`, or fix its "image" size',
        });
      }
      record.hints = { file: found.path, used: true, entries: hints.entries.length, placeholders: hints.placeholders };
      if (hints.entries.length === 0) hints = undefined;
    } catch (error) {
      if (!isKinhueError(error)) throw error;
      record.hints = { file: found.path, used: false, ignored: error.describe() };
      hints = undefined;
    }
  }
  const reference = sources.reference ? await cachedReference(sources.reference) : undefined;
  if (reference)
    record.reference = {
      files: reference.files,
      samples: reference.L.length,
      ...(reference.notes.length ? { notes: reference.notes } : {}),
    };
  const guides: Guide[] = [];
  if (reference) guides.push(referenceGuide(reference));
  if (hints) guides.push(hintsGuide(hints, width, height, sources.priorWeight));
  return { guides, record };
}

/**
 * Looks for the scan's hints file, then prepares its guides (see prepareGuides).
 *
 * @example
 *   const guidance = await prepareGuidance('scans/barn.jpg', 3000, 2000, { reference: 'colour/' });
 */
export async function prepareGuidance(
  source: string,
  width: number,
  height: number,
  options: HintsSearch & Omit<GuidanceSources, 'hints'> & { useHints?: boolean } = {},
): Promise<Guidance> {
  const hints = options.useHints === false ? null : await findHints(source, options);
  return prepareGuides({ hints, reference: options.reference, priorWeight: options.priorWeight }, width, height);
}

/** Where the model is sure, its colour stays; where it is not, the reference's colour takes over. */
function referenceGuide(reference: ReferenceSet): Guide {
  return {
    name: 'reference',
    apply: (colour: GuideInput) => {
      const t = performance.now();
      const { width: w, height: h, confidence } = colour;
      const transferred = transferReference(reference, colour.L, w, h);
      const a = new Float32Array(w * h);
      const b = new Float32Array(w * h);
      for (let i = 0; i < w * h; i++) {
        const c = Math.min(1, Math.max(0, confidence[i]!));
        a[i] = c * colour.a[i]! + (1 - c) * transferred.a[i]!;
        b[i] = c * colour.b[i]! + (1 - c) * transferred.b[i]!;
      }
      return { a, b, record: { milliseconds: Math.round(performance.now() - t) } };
    },
  };
}

/** The hinted colours spread along L* (Levin et al. 2004) from the model's colour as the prior. */
function hintsGuide(hints: Hints, scanWidth: number, scanHeight: number, priorWeight?: number): Guide {
  return {
    name: 'hints',
    apply: (colour: GuideInput) => {
      const t = performance.now();
      const { width: w, height: h } = colour;
      const drawn = rasteriseHints(hints, colour.L, w, h, scanWidth, scanHeight);
      // The prediction's own colour boundaries bound the hints too (our addition; see withPredictionEdges).
      const result = propagateHints(colour, drawn.constraints, { priorWeight, predictionEdges: PREDICTION_EDGE_SCALE });
      return {
        a: result.a,
        b: result.b,
        record: {
          pixels: drawn.pixels,
          adjustments: drawn.adjustments.slice(0, LISTED_ADJUSTMENTS).map((adj) => adj.message),
          ...(drawn.adjustments.length > LISTED_ADJUSTMENTS ? { adjustmentsNotListed: drawn.adjustments.length - LISTED_ADJUSTMENTS } : {}),
          ...(drawn.scaled ? { scaled: drawn.scaled } : {}),
          iterations: result.iterations,
          milliseconds: Math.round(performance.now() - t),
        },
      };
    },
  };
}

/**
 * The lines a scan's warnings get from its guidance record: a hints file not used, colours weakened,
 * reference notes.
 * @example
 *   guidanceWarnings({ hints: { file: 'a.hints.json', used: false, ignored: 'bad JSON' } }); // ['hints file not used: bad JSON']
 */
export function guidanceWarnings(record: GuidanceRecord): string[] {
  const warnings: string[] = [];
  const faces = record.skin?.faces.length ?? 0;
  if (faces) warnings.push(`skin prior: ${faces} face${faces === 1 ? '' : 's'} given a skin hue; correct with a hints file if wrong`);
  if (record.hints?.ignored) warnings.push(`hints file not used: ${record.hints.ignored}`);
  for (const note of record.hints?.adjustments ?? []) warnings.push(`hint ${note}`);
  const notListed = record.hints?.adjustmentsNotListed;
  if (notListed) warnings.push(`hints: and ${notListed} more entries whose chroma was reduced (not listed)`);
  for (const note of record.reference?.notes ?? []) warnings.push(`reference ${note}`);
  return warnings;
}
