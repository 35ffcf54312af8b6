/** Whole-image comparisons used by training, scoring and tuning reports. */
import { ciede2000 } from './ciede2000.js';
import type { LabPlanes } from './lab.js';

function samePlanes(x: LabPlanes, y: LabPlanes, what: string): number {
  const n = x.L.length;
  if (y.L.length !== n || x.a.length !== n || x.b.length !== n || y.a.length !== n || y.b.length !== n) {
    throw new RangeError(`${what}: the two images differ in size (${n} and ${y.L.length} pixels)`);
  }
  return n;
}

/**
 * Mean CIEDE2000 difference over all pixels of two images of equal size (NaN when empty).
 * @example
 * meanCiede2000(restoredLab, originalLab); // e.g. 6.2
 */
export function meanCiede2000(x: LabPlanes, y: LabPlanes): number {
  const n = samePlanes(x, y, 'meanCiede2000');
  let sum = 0;
  for (let i = 0; i < n; i++) sum += ciede2000(x.L[i], x.a[i], x.b[i], y.L[i], y.a[i], y.b[i]);
  return sum / n;
}

/**
 * Mean Euclidean distance in the a*b* plane over all pixels (lightness ignored; NaN when empty).
 * @example
 * meanAbError(predictedLab, originalLab); // e.g. 9.8
 */
export function meanAbError(x: LabPlanes, y: LabPlanes): number {
  const n = samePlanes(x, y, 'meanAbError');
  let sum = 0;
  for (let i = 0; i < n; i++) {
    const da = x.a[i] - y.a[i],
      db = x.b[i] - y.b[i];
    sum += Math.sqrt(da * da + db * db);
  }
  return sum / n;
}

/**
 * Peak signal-to-noise ratio in dB of two 8-bit images of equal layout, over every value;
 * Infinity when they are equal.
 * @example
 * psnr(restoredRgb, originalRgb); // e.g. 24.1
 */
export function psnr(x: Uint8Array, y: Uint8Array): number {
  if (x.length !== y.length) throw new RangeError(`psnr: the two images differ in size (${x.length} and ${y.length} values)`);
  if (x.length === 0) throw new RangeError('psnr: the images are empty');
  let se = 0;
  for (let i = 0; i < x.length; i++) {
    const d = x[i] - y[i];
    se += d * d;
  }
  if (se === 0) return Infinity;
  return 10 * Math.log10((255 * 255 * x.length) / se);
}
