/**
 * Held-out evaluation: colourise each held-out photo from its L* alone, bring the quarter-resolution
 * a*b* up to the photo's size bilinearly, put the original L* back, and compare with the original:
 * mean CIEDE2000, PSNR of the 8-bit sRGB rendering, the result's colourfulness (Hasler &
 * Suesstrunk 2003), and whether its hues are right (right hue, false colour, left grey: the figures
 * `score` reports, colour/hue-agreement.ts). The grey baseline is the same comparison with a* = b* = 0.
 */
import {
  colourfulness,
  hueAgreement,
  labToSrgb,
  meanCiede2000,
  meanOfPresent,
  psnr,
  resizePlane as resizeBilinear,
  type LabPlanes,
} from '../colour/index.js';
import type { Photo } from './photo-set.js';

/** Averages over the held-out photos (each photo's figure counts once). */
export interface Evaluation {
  /** Mean CIEDE2000 difference from the original (lower is better). */
  ciede2000: number;
  /** PSNR in dB of the 8-bit sRGB result against the original (higher is better). */
  psnr: number;
  /** Mean colourfulness of the results, Hasler & Suesstrunk 2003 (0-255 scale). */
  colourfulness: number;
  /** Mean colourfulness of the originals, to read the results' against (absent in records from before it). */
  originalColourfulness?: number;
  /** Percent of clearly coloured pixels given a hue within 30 degrees (higher is better); null when no photo has such pixels. */
  rightHue: number | null;
  /** Percent of pixels given a clear colour that is not there (lower is better). */
  falseColour: number;
  /** Percent of clearly coloured pixels left near-neutral (lower is better); null as rightHue. */
  leftGrey: number | null;
  /** Photos evaluated. */
  photos: number;
  /** Photos with clearly coloured pixels: what rightHue and leftGrey are averaged over. */
  colouredPhotos: number;
}

/**
 * Right-hue points that weigh as much as 1 of mean CIEDE2000 when a step is chosen: `score`'s verdict
 * counts 3 points of right hue and 0.5 of CIEDE2000 as the least differences that matter (report/verdict.ts),
 * so 6 points trade for 1. Our own rate.
 */
export const RIGHT_HUE_PER_CIEDE2000 = 6;

/**
 * What chooses the step a run keeps (lower is better): mean CIEDE2000 less right hue over
 * RIGHT_HUE_PER_CIEDE2000. CIEDE2000 alone prefers cautious, greyish steps (grey is often close in
 * CIEDE2000), right hue alone bold ones; together a step must earn its hues without losing more in
 * CIEDE2000 than they are worth. Photos without clearly coloured pixels have no right hue: CIEDE2000 alone then.
 * @example
 *   choiceScore({ ...evaluation, ciede2000: 7, rightHue: 60 }); // -3
 */
export function choiceScore(evaluation: { ciede2000: number; rightHue?: number | null }): number {
  return evaluation.ciede2000 - (evaluation.rightHue ?? 0) / RIGHT_HUE_PER_CIEDE2000;
}

/** a*b* predicted for an L* plane, at any resolution of the same aspect (the model's is a quarter). */
export interface AbPrediction {
  a: Float32Array;
  b: Float32Array;
  width: number;
  height: number;
}

/** Colourises one L* plane of `width` x `height`. */
export type AbPredictor = (L: Float32Array, width: number, height: number, photo: Photo) => AbPrediction | Promise<AbPrediction>;

const originals = new WeakMap<Photo, Uint8Array>();

function originalRgb(photo: Photo): Uint8Array {
  let rgb = originals.get(photo);
  if (!rgb) {
    rgb = labToSrgb({ L: photo.L, a: photo.a, b: photo.b }, new Uint8Array(photo.L.length * 3), 3);
    originals.set(photo, rgb);
  }
  return rgb;
}

/**
 * Scores a predictor on photos; with no predictor, the grey baseline (L* only).
 * @example
 *   const grey = await evaluatePhotos(set.holdout);
 *   const model = await evaluatePhotos(set.holdout, (L, w, h) => predictAb(network, L, w, h));
 */
export async function evaluatePhotos(photos: Photo[], predictor?: AbPredictor): Promise<Evaluation> {
  let de = 0;
  let db = 0;
  let cf = 0;
  let ocf = 0;
  let fc = 0;
  const right: (number | null)[] = [];
  const grey: (number | null)[] = [];
  for (const photo of photos) {
    const { width, height, L } = photo;
    let result: LabPlanes;
    if (predictor) {
      const p = await predictor(L, width, height, photo);
      result = {
        L,
        a: p.width === width && p.height === height ? p.a : resizeBilinear(p.a, p.width, p.height, width, height),
        b: p.width === width && p.height === height ? p.b : resizeBilinear(p.b, p.width, p.height, width, height),
      };
    } else {
      result = { L, a: new Float32Array(L.length), b: new Float32Array(L.length) };
    }
    const rgb = labToSrgb(result, new Uint8Array(L.length * 3), 3);
    const original = { L, a: photo.a, b: photo.b };
    de += meanCiede2000(result, original);
    const hues = hueAgreement(result, original);
    right.push(hues.rightHue);
    grey.push(hues.leftGrey);
    fc += hues.falseColour;
    // An exact match would give Infinity; cap at 100 dB so averages stay finite (common practice).
    db += Math.min(100, psnr(rgb, originalRgb(photo)));
    cf += colourfulness(rgb, 3);
    ocf += colourfulness(originalRgb(photo), 3);
  }
  const n = photos.length;
  const rightHue = meanOfPresent(right);
  return {
    ciede2000: de / n,
    psnr: db / n,
    colourfulness: cf / n,
    originalColourfulness: ocf / n,
    rightHue: rightHue.mean,
    falseColour: fc / n,
    leftGrey: meanOfPresent(grey).mean,
    photos: n,
    colouredPhotos: rightHue.photos,
  };
}
