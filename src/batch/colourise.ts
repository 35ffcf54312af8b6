/**
 * Colour for one image's L*, in memory, through restore's own stages: the working size, predict, the
 * guides, and the full-resolution grid of render. Used by scoring (whole planes), so a score describes
 * what restore does.
 */
import {
  fitInside,
  greyToLightness,
  lightnessToGrey,
  limitChroma,
  resizePlane,
  shrinkPlane,
  sliceRows,
  type Guide,
} from '../colour/index.js';
import type { FaceFinder, KinhueModel } from '../model/index.js';
import type { ModelMemory } from './memory.js';
import { applyGuides, scanGuides } from './stages/guide.js';
import { predictColour, type PredictSettings } from './stages/predict.js';
import { fullSizeGrid } from './stages/render.js';

export interface ColouriseOptions extends PredictSettings {
  /** Long side in pixels at which the model runs (never above the image's own). Default 512. */
  workSize?: number;
  /** Applied at the working size, in order, before the colour is brought to full size. */
  guides?: readonly Guide[];
  /** Finds faces for the skin prior, applied before the guides (as restore does); without it, no skin prior. */
  faceFinder?: FaceFinder;
  /** The colour memory, remembered through this model (memory.ts), applied after the skin prior and before the guides. */
  memory?: ModelMemory;
}

/**
 * The working size for an image: long side `workSize` (or the image's own, if smaller), aspect kept.
 * @example
 *   workingSize(4000, 3000, 512); // { width: 512, height: 384 }
 */
export function workingSize(width: number, height: number, workSize: number): { width: number; height: number } {
  return fitInside(width, height, workSize);
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
  const predicted = await predictColour(Lwork, ws.width, ws.height, model, { ...options, features: options.memory !== undefined });
  const { colour } = applyGuides(predicted, scanGuides(predicted, options, options.guides ?? []));
  const a = new Float32Array(width * height);
  const b = new Float32Array(width * height);
  sliceRows(fullSizeGrid(colour), L, width, height, 0, height, a, b);
  limitChroma(L, a, b);
  const confidence = resizePlane(colour.confidence, colour.confidenceWidth, colour.confidenceHeight, width, height);
  return { a, b, confidence, meanConfidence: mean(colour.confidence) };
}

/** Mean of a plane (0 for an empty one). */
export function mean(plane: Float32Array): number {
  let s = 0;
  for (let i = 0; i < plane.length; i++) s += plane[i]!;
  return plane.length ? s / plane.length : 0;
}
