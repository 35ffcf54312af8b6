/**
 * Colour for one image's L*, in memory: the model runs at the working size (predicting at a quarter of
 * it), colour is brought up to the working size edge-aware, an optional refine step (colour hints,
 * reference photos) adjusts it there, and a bilateral grid carries it to full resolution guided by the
 * full-resolution L*. Used by the per-file restore (strip by strip) and by scoring (whole planes).
 */
import {
  bilateralGrid, bilateralUpsample, greyToLightness, lightnessToGrey, limitChroma, resizePlane, shrinkPlane, sliceRows,
  type BilateralGrid, type WorkingColour,
} from '../colour/index.js';
import { applySkinPrior, type SkinRecord } from '../hints/index.js';
import { findFaces, predict, type Decoding, type FaceFinder, type KinhueModel } from '../model/index.js';

export type { WorkingColour };

/** Adjusts the working-size colour in place before it is brought to full resolution. */
export type RefineStep = (work: WorkingColour) => void | Promise<void>;

export interface ColouriseOptions {
  /** Long side in pixels at which the model runs (never above the image's own). Default 512. */
  workSize?: number;
  /** How colour is chosen from the prediction. Default: the model's. */
  decoding?: Decoding;
  /** Annealed-mean temperature. Default: the model's. */
  temperature?: number;
  /** Finds faces for the skin prior; without it, no skin prior. */
  faceFinder?: FaceFinder;
  /** Applied at the working size before upsampling, after the skin prior (hints have the last word). */
  refine?: RefineStep;
}

/** The working colour and, when a face finder was given, what the skin prior did. */
export interface WorkingResult {
  work: WorkingColour;
  skin?: SkinRecord;
}

/** Bilateral grid settings per stage: quarter -> working size, then working size -> full size (cells of 2). */
const STAGE1 = { rangeStep: 4 };
const STAGE2 = { rangeStep: 4, cell: 2 };

/**
 * The working size for an image: long side `workSize` (or the image's own, if smaller), aspect kept.
 * @example
 *   workingSize(4000, 3000, 512); // { width: 512, height: 384 }
 */
export function workingSize(width: number, height: number, workSize: number): { width: number; height: number } {
  const s = Math.min(1, workSize / Math.max(width, height));
  return { width: Math.max(1, Math.round(width * s)), height: Math.max(1, Math.round(height * s)) };
}

/**
 * Runs the model on working-size L* and brings its colour to the working size, edge-aware; then gives
 * the faces found a skin hue (when a face finder is given) and refines.
 * @example
 *   const { work } = await workingColour(Lwork, 512, 384, model);
 */
export async function workingColour(
  L: Float32Array,
  width: number,
  height: number,
  model: KinhueModel,
  options: ColouriseOptions = {},
): Promise<WorkingResult> {
  const p = await predict(model, L, width, height, { decoding: options.decoding, temperature: options.temperature });
  const guide = shrinkPlane(L, width, height, p.width, p.height);
  const predicted = bilateralUpsample(guide, p.a, p.b, p.width, p.height, L, width, height, {
    ...STAGE1,
    weights: p.confidence,
  });
  const skin = options.faceFinder
    ? applySkinPrior(L, predicted.a, predicted.b, width, height, findFaces(options.faceFinder, L, width, height))
    : undefined;
  const work: WorkingColour = {
    width, height, L, a: skin?.a ?? predicted.a, b: skin?.b ?? predicted.b,
    confidence: p.confidence, confidenceWidth: p.width, confidenceHeight: p.height,
  };
  if (options.refine) await options.refine(work);
  return skin ? { work, skin: skin.record } : { work };
}

/**
 * The grid that carries working-size colour to full resolution (read it with sliceRows).
 * @example
 *   const grid = fullSizeGrid(work);
 */
export function fullSizeGrid(work: WorkingColour): BilateralGrid {
  return bilateralGrid(work.L, work.a, work.b, work.width, work.height, STAGE2);
}

/**
 * Full-resolution a*, b* and confidence (0-1) for an L* plane held whole in memory. The a*b* is kept inside
 * the sRGB gamut at the given L*, so L* plus the new a*b* converts to sRGB without changing L*.
 * @example
 *   const { a, b, confidence } = await colouriseLightness(L, 800, 600, model, { workSize: 512 });
 */
export async function colouriseLightness(
  L: Float32Array,
  width: number,
  height: number,
  model: KinhueModel,
  options: ColouriseOptions = {},
): Promise<{ a: Float32Array; b: Float32Array; confidence: Float32Array; meanConfidence: number }> {
  const ws = workingSize(width, height, options.workSize ?? 512);
  // Shrink as restore does: average sRGB-encoded grey, not L* (see workingLab).
  const grey = lightnessToGrey(L, new Float32Array(L.length));
  const Lwork = greyToLightness(shrinkPlane(grey, width, height, ws.width, ws.height), 1);
  const { work } = await workingColour(Lwork, ws.width, ws.height, model, options);
  const a = new Float32Array(width * height);
  const b = new Float32Array(width * height);
  sliceRows(fullSizeGrid(work), L, width, height, 0, height, a, b);
  limitChroma(L, a, b);
  const confidence = resizePlane(work.confidence, work.confidenceWidth, work.confidenceHeight, width, height);
  return { a, b, confidence, meanConfidence: mean(work.confidence) };
}

/** Mean of a plane (0 for an empty one). */
export function mean(plane: Float32Array): number {
  let s = 0;
  for (let i = 0; i < plane.length; i++) s += plane[i]!;
  return plane.length ? s / plane.length : 0;
}
