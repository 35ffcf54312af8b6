/**
 * The figures repair is judged by: detection precision and recall at pixel level with a tolerance (a
 * found pixel is right when true damage lies within `tolerance` pixels, a damaged pixel is found when a
 * found pixel lies within `tolerance`: the matching of Martin et al. 2004's boundary benchmark, on
 * squares), PSNR over the damaged pixels only (peak L* 100), and how much of an undamaged scan changed.
 */
import { dilateMask } from './morphology.js';

export interface DetectionFigures {
  precision: number;
  recall: number;
  /** Pixels found, and pixels truly damaged. */
  found: number;
  damaged: number;
}

/**
 * Precision and recall of `found` against `truth` (0/1 masks, w x h) with a square tolerance.
 * Empty masks count as perfect on their side (nothing found wrongly, nothing missed).
 */
export function detectionFigures(found: Uint8Array, truth: Uint8Array, w: number, h: number, tolerance = 2): DetectionFigures {
  const nearTruth = dilateMask(truth, w, h, tolerance);
  const nearFound = dilateMask(found, w, h, tolerance);
  let f = 0,
    fRight = 0,
    t = 0,
    tFound = 0;
  for (let i = 0; i < truth.length; i++) {
    if (found[i]) {
      f++;
      if (nearTruth[i]) fRight++;
    }
    if (truth[i]) {
      t++;
      if (nearFound[i]) tFound++;
    }
  }
  return { precision: f ? fRight / f : 1, recall: t ? tFound / t : 1, found: f, damaged: t };
}

/** Sums of detection counts over many pictures, for pooled figures. */
export function poolDetection(items: DetectionFigures[]): DetectionFigures {
  let right = 0,
    found = 0,
    hit = 0,
    damaged = 0;
  for (const d of items) {
    right += d.precision * d.found;
    found += d.found;
    hit += d.recall * d.damaged;
    damaged += d.damaged;
  }
  return { precision: found ? right / found : 1, recall: damaged ? hit / damaged : 1, found, damaged };
}

/** Squared error of `estimate` against `truth` summed over the masked pixels, with their count. */
export function maskedSquaredError(estimate: Float32Array, truth: Float32Array, mask: Uint8Array): { sum: number; count: number } {
  let sum = 0,
    count = 0;
  for (let i = 0; i < mask.length; i++) {
    if (!mask[i]) continue;
    const d = estimate[i]! - truth[i]!;
    sum += d * d;
    count++;
  }
  return { sum, count };
}

/** PSNR in dB of a pooled squared error over L* (peak 100). */
export function psnrOf(error: { sum: number; count: number }): number {
  if (!error.count) return Infinity;
  const mse = error.sum / error.count;
  return mse > 0 ? 10 * Math.log10((100 * 100) / mse) : Infinity;
}

export interface ChangeFigures {
  /** Share of pixels whose value changed at all. */
  changedShare: number;
  /** Mean |delta L*| over the whole picture. */
  meanAbsDelta: number;
}

/** How much a repair changed a picture that had nothing to repair. */
export function changeFigures(before: Float32Array, after: Float32Array): ChangeFigures {
  let changed = 0,
    sum = 0;
  for (let i = 0; i < before.length; i++) {
    const d = Math.abs(after[i]! - before[i]!);
    if (d > 0) changed++;
    sum += d;
  }
  return { changedShare: changed / before.length, meanAbsDelta: sum / before.length };
}

/**
 * A soft scene of L* (w x h): broad gradients and a blurred disc, as a print's sky, walls and faces are
 * (kinhue's own), on which the tests and the benchmark draw damage.
 */
export function softScene(w: number, h: number): Float32Array {
  const L = new Float32Array(w * h);
  for (let y = 0; y < h; y++) {
    for (let x = 0; x < w; x++) {
      const disc = 1 / (1 + Math.exp((Math.hypot(x - w * 0.35, y - h * 0.5) - h * 0.3) / 3));
      L[y * w + x] = 35 + 30 * (x / w) + 15 * Math.sin(y / 23) + 20 * disc;
    }
  }
  return L;
}
