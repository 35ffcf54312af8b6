/**
 * The classical damage detector: morphological top-hats (Meyer 1979; Serra 1982) find details
 * narrower than a square window that stand out brighter (white top-hat, L* minus its opening) or darker
 * (black top-hat, its closing minus L*) than their surroundings: specks, hairs and scratches, but also
 * catch-lights, twigs and print grain. A pixel is a seed when its top-hat passes a threshold set by the
 * scan's grain (a robust noise estimate) and by how busy its neighbourhood is, so texture must stand out
 * more than a plain sky; the mask then grows from the seeds into weaker response of the same sign
 * (hysteresis, Canny 1986) to take in soft edges, and by one pixel.
 */
import { boxMean, dilateMask } from './morphology.js';
import { openingAndClosing } from './onnx-morphology.js';

export interface DetectorSettings {
  /** Half the top-hat window: details up to about 2 * radius pixels across are found. */
  radius: number;
  /** The least top-hat, in L*, that seeds the mask anywhere. */
  minContrast: number;
  /** Seeds also need this many times the scan's noise (standard deviation of L*). */
  noiseFactor: number;
  /** ... and this many times the mean top-hat of their neighbourhood (texture). */
  activityFactor: number;
  /** Top-hat values above this count as this much texture (one strong speck raises its own threshold little). */
  activityCap: number;
  /** Half the neighbourhood window over which texture is measured. */
  activityRadius: number;
  /** Grown pixels need this share of the seed threshold. */
  growRatio: number;
  /** ... and this many times the noise left after the 3 x 3 mean. */
  growNoise: number;
  /** Pixels added around the mask at the end. */
  margin: number;
}

/**
 * Settings chosen on seeded synthetic damage over soft, grainy scenes (`softScene` in measures.ts):
 * the detection goals met while undamaged scenes stay under 0.1% changed. On detailed photographs
 * (foliage, crowds, lettering) the detector takes fine detail for damage: `npm run bench -- repair`.
 */
export const DETECTOR_SETTINGS: DetectorSettings = {
  radius: 5,
  minContrast: 6,
  noiseFactor: 8,
  activityFactor: 2.5,
  activityRadius: 12,
  activityCap: 30,
  growRatio: 0.5,
  growNoise: 4,
  margin: 1,
};

export interface Detection {
  /** 1 where damage was found. */
  mask: Uint8Array;
  /** Signed top-hat: positive where brighter than its surroundings, negative where darker. */
  response: Float32Array;
  /** The seed threshold per pixel, in L*. */
  threshold: Float32Array;
  /** The scan's estimated noise, standard deviation in L*. */
  noise: number;
}

/**
 * Finds dust, hairs and scratches in an L* plane.
 * @example
 *   const { mask } = detectDamage(L, width, height);
 */
export function detectDamage(L: Float32Array, w: number, h: number, settings: DetectorSettings = DETECTOR_SETTINGS): Detection {
  const n = w * h;
  // Grain decides the top-hat of a plain area (the window's extreme grain): a 3 x 3 mean first cuts
  // it to a third, while a speck or hair a pixel or more across keeps most of its contrast.
  const smooth = boxMean(L, w, h, 1);
  const { open, close } = openingAndClosing(smooth, w, h, settings.radius);
  const response = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    const bright = smooth[i]! - open[i]!;
    const dark = close[i]! - smooth[i]!;
    response[i] = bright >= dark ? bright : -dark;
  }
  const noise = noiseSigma(L, w, h);
  const smoothNoise = noise / 3;
  const threshold = new Float32Array(n);
  const base = Math.max(settings.minContrast, settings.noiseFactor * smoothNoise);
  if (settings.activityFactor > 0) {
    // Texture measure: capped, so one strong speck raises its own neighbourhood's threshold little.
    const strength = response.map((r) => Math.min(Math.abs(r), settings.activityCap));
    const activity = boxMean(strength, w, h, settings.activityRadius);
    for (let i = 0; i < n; i++) threshold[i] = Math.max(base, settings.activityFactor * activity[i]!);
  } else {
    threshold.fill(base);
  }
  const growFloor = settings.growNoise * smoothNoise;
  const mask = new Uint8Array(n);
  const stack: number[] = [];
  for (let i = 0; i < n; i++) {
    if (mask[i] || Math.abs(response[i]!) < threshold[i]!) continue;
    mask[i] = 1;
    stack.push(i);
    const sign = response[i]! > 0;
    while (stack.length) {
      const p = stack.pop()!;
      const x = p % w;
      const y = (p - x) / w;
      for (let dy = -1; dy <= 1; dy++) {
        const yy = y + dy;
        if (yy < 0 || yy >= h) continue;
        for (let dx = -1; dx <= 1; dx++) {
          const xx = x + dx;
          if (xx < 0 || xx >= w) continue;
          const q = yy * w + xx;
          if (mask[q]) continue;
          const r = response[q]!;
          if (r > 0 === sign && Math.abs(r) >= Math.max(growFloor, settings.growRatio * threshold[q]!)) {
            mask[q] = 1;
            stack.push(q);
          }
        }
      }
    }
  }
  return { mask: dilateMask(mask, w, h, settings.margin), response, threshold, noise };
}

/**
 * Noise of an L* plane as a standard deviation: the median absolute deviation of the second
 * difference along rows, which edges barely move (Donoho & Johnstone 1994 use the same robust scale).
 */
export function noiseSigma(L: Float32Array, w: number, h: number): number {
  const bins = new Uint32Array(4096);
  const scale = 100;
  let count = 0;
  const step = Math.max(1, Math.floor((w * h) / 500_000));
  for (let y = 0; y < h; y += step) {
    for (let x = 1; x + 1 < w; x++) {
      const i = y * w + x;
      const d = Math.abs(L[i]! - 0.5 * (L[i - 1]! + L[i + 1]!));
      bins[Math.min(4095, Math.floor(d * scale))]++;
      count++;
    }
  }
  if (!count) return 0;
  let seen = 0;
  let k = 0;
  for (; k < 4096; k++) {
    seen += bins[k]!;
    if (seen * 2 >= count) break;
  }
  // A second difference of independent noise has variance 1.5 sigma^2; 1.4826 turns a MAD into a sigma.
  return (1.4826 * ((k + 0.5) / scale)) / Math.sqrt(1.5);
}
