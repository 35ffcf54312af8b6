/**
 * What a restore run is asked to do, its defaults, and the settings that decide whether an earlier
 * result can be kept (the manifest compares their key).
 */
import { createHash } from 'node:crypto';
import { availableParallelism } from 'node:os';
import type { OutputFormat } from '../image/index.js';
import type { Decoding } from '../model/index.js';
import type { Part } from './part.js';

/** `same` keeps each source's own format (falling back to PNG for formats kinhue does not write). */
export type FormatChoice = 'same' | OutputFormat;

export const FORMAT_CHOICES: readonly FormatChoice[] = ['same', 'jpeg', 'png', 'tiff', 'webp'];

/** Every default of a restore run that does not depend on the model or the machine, declared once (the CLI shows these). */
export const RESTORE_DEFAULTS = {
  format: 'same' as FormatChoice,
  confidence: true,
  force: false,
  dryRun: false,
  skin: true,
  repair: false,
  repairedScan: false,
} as const;

/** The manifest's file name inside the output folder. */
export const MANIFEST_NAME = 'kinhue-run.jsonl';

export interface RestoreOptions {
  /** Files, folders (searched recursively) and glob patterns. */
  inputs: string[];
  /** Output folder; created when missing. */
  out: string;
  /** Model folder. Default: the shipped model. */
  model?: string;
  /** Files processed at once, each in its own worker thread with its own model. Default: the number of cores. */
  jobs?: number;
  /** Long side in pixels at which the model runs. Default: the model's working size (512 for the shipped one). */
  workSize?: number;
  /** How colour is chosen from the model's prediction. Default: the model's own; annealed mean when only a temperature is given. */
  decoding?: Decoding;
  /** Annealed-mean temperature. Default: the model's own. */
  temperature?: number;
  /** How much class rebalancing least-CIEDE2000 decoding leaves in, 0 to 1. Default: the model's own. */
  vividness?: number;
  /** Output format. Default 'same'. */
  format?: FormatChoice;
  /** JPEG/WebP quality 1-100. Default: the encoder's. */
  quality?: number;
  /** Write `<name>.confidence.png`. Default true. */
  confidence?: boolean;
  /** Redo files the manifest says are finished. */
  force?: boolean;
  /** Folder of `<name>.hints.json` files (searched before each scan's own folder, where they are always looked for); false: no hints. */
  hints?: string | false;
  /** A reference colour photograph, or a folder of them, for every scan (Welsh et al. 2002). */
  reference?: string;
  /**
   * A folder of the archive's own colour photographs (the same people and places) remembered through the
   * model: each scan's regions take the colours of the regions they resemble most (batch/memory.ts).
   */
  memory?: string;
  /** Give the faces found a skin hue (the skin prior). Default true. */
  skin?: boolean;
  /** Take out dust, hairs and scratches before colouring, and write `<name>.repair.png`. Default false. */
  repair?: boolean;
  /** Also write the repaired scan without colour, `<name>.repaired.<ext>` (implies repair). Default false. */
  repairedScan?: boolean;
  /**
   * Restore only this part of the scans (see part.ts): parts of one run, started alike on many
   * machines, share the output folder and never write the same file.
   */
  part?: Part;
  /** Plan only: discover, name outputs, read the manifest, but run nothing and write nothing. */
  dryRun?: boolean;
  /** Pixel limit per image (decompression-bomb guard); default from KINHUE_MAX_PIXELS or the image module's. */
  maxPixels?: number;
  /** Stops the run: no new file starts; files being restored finish. */
  signal?: AbortSignal;
  /** Stops the run at once: workers are ended and temporary files removed; unfinished files stay unfinished. */
  hardSignal?: AbortSignal;
}

/**
 * The settings that shape a result. Two runs with equal settings (and an unchanged source) make the same
 * file, so the manifest skips it. Add new output-shaping options (hints, reference photos) here.
 */
export interface RestoreSettings {
  model: string;
  weightsSha256: string;
  workSize: number;
  decoding: Decoding;
  /** Used by annealed-mean decoding only. */
  temperature: number;
  /** Used by least-CIEDE2000 decoding only; absent at 0 (all rebalancing undone), so earlier runs keep their key. */
  vividness?: number;
  format: FormatChoice;
  quality: number | null;
  confidence: boolean;
  /** Absolute hints folder, or false for no hints, when given (absent otherwise, so earlier runs keep their key). */
  hints?: string | false;
  /** Absolute reference photo or folder, when given. */
  reference?: string;
  /** The colour memory's absolute folder and the SHA-256 of its photos, when one is used. */
  memory?: { folder: string; sha256: string };
  /** False when the skin prior is off (absent when on, the default). */
  skin?: false;
  /** The repair model and how it is used, when scans are repaired before colouring (absent when off, the default). */
  repair?: { model: string; weightsSha256: string; detection: 'network' | 'confirmed'; threshold: number; fill: 'network' | 'median' };
  /** True when the repaired scan is written too. */
  repairedScan?: true;
}

/**
 * A short stable key of the settings (SHA-256 of their JSON with sorted keys, first 16 hex digits).
 * @example
 *   settingsKey(settings); // '3f2a9c...'
 */
export function settingsKey(settings: RestoreSettings): string {
  const sorted = Object.fromEntries(Object.entries(settings).sort(([x], [y]) => (x < y ? -1 : x > y ? 1 : 0)));
  return createHash('sha256').update(JSON.stringify(sorted)).digest('hex').slice(0, 16);
}

/** Default for --jobs: every core. */
export function defaultJobs(): number {
  return Math.max(1, availableParallelism());
}
