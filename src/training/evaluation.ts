/**
 * Held-out evaluation: colourise each held-out photo from its L* alone, bring the quarter-resolution
 * a*b* up to the photo's size bilinearly, put the original L* back, and compare with the original:
 * mean CIEDE2000, PSNR of the 8-bit sRGB rendering, and the result's colourfulness (Hasler &
 * Suesstrunk 2003). The grey baseline is the same comparison with a* = b* = 0.
 */
import { colourfulness, labToSrgb, meanCiede2000, psnr, type LabPlanes } from '../colour/index.js';
import type { Photo } from './photo-set.js';
import { resizeBilinear } from './resample.js';

/** Averages over the held-out photos (each photo's figure counts once). */
export interface Evaluation {
  /** Mean CIEDE2000 difference from the original (lower is better). */
  ciede2000: number;
  /** PSNR in dB of the 8-bit sRGB result against the original (higher is better). */
  psnr: number;
  /** Mean colourfulness of the results, Hasler & Suesstrunk 2003 (0-255 scale). */
  colourfulness: number;
  /** Photos evaluated. */
  photos: number;
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
    de += meanCiede2000(result, { L, a: photo.a, b: photo.b });
    // An exact match would give Infinity; cap at 100 dB so averages stay finite (common practice).
    db += Math.min(100, psnr(rgb, originalRgb(photo)));
    cf += colourfulness(rgb, 3);
  }
  const n = photos.length;
  return { ciede2000: de / n, psnr: db / n, colourfulness: cf / n, photos: n };
}
