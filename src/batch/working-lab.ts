/**
 * The scan at the working size in CIELAB: sRGB codes averaged over each working pixel's footprint, then
 * converted (the same shrinking the training data gets, so the model sees what it learnt from). Reads the
 * decoded samples directly: no full-resolution float plane is made.
 */
import { srgbToLab, type LabPlanes } from '../colour/index.js';
import type { Pixels } from '../image/index.js';

/**
 * Area-averages the scan to `width` x `height` and converts it to CIELAB (a* = b* = 0 for grey scans).
 * @example
 *   const lab = workingLab(decoded.pixels, 512, 384);
 */
export function workingLab(px: Pixels, width: number, height: number): LabPlanes {
  const { width: W, height: H, channels, data } = px;
  const c = channels >= 3 ? 3 : 1;
  const n = width * height;
  const sums = new Float64Array(n * c);
  const counts = new Float64Array(n);
  const colOf = new Int32Array(W);
  for (let x = 0; x < W; x++) colOf[x] = Math.min(width - 1, Math.floor((x * width) / W));
  for (let y = 0; y < H; y++) {
    const cellRow = Math.min(height - 1, Math.floor((y * height) / H)) * width;
    let i = y * W * channels;
    if (c === 3) {
      for (let x = 0; x < W; x++, i += channels) {
        const cell = cellRow + colOf[x]!;
        sums[cell * 3] += data[i]!;
        sums[cell * 3 + 1] += data[i + 1]!;
        sums[cell * 3 + 2] += data[i + 2]!;
        counts[cell]! += 1;
      }
    } else {
      for (let x = 0; x < W; x++, i += channels) {
        const cell = cellRow + colOf[x]!;
        sums[cell] += data[i]!;
        counts[cell]! += 1;
      }
    }
  }
  const max = px.depth === 16 ? 65535 : 255;
  const mean = new Float32Array(n * c);
  for (let k = 0; k < n; k++) {
    const f = counts[k]! > 0 ? 1 / (counts[k]! * max) : 0;
    for (let j = 0; j < c; j++) mean[k * c + j] = sums[k * c + j]! * f;
  }
  return srgbToLab(mean, c);
}
