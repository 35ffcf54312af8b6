/**
 * The scan at the working size in CIELAB: sRGB codes area-averaged over each working pixel's footprint,
 * then converted (the same shrinking the training photos get, so the model sees what it learnt from).
 * Reads the decoded samples directly: no full-resolution float plane is made.
 */
import { areaMean, srgbToLab, type LabPlanes } from '../colour/index.js';
import type { Pixels } from '../image/index.js';

/**
 * Area-averages the scan to `width` x `height` and converts it to CIELAB (a* = b* = 0 for grey scans).
 * @example
 *   const lab = workingLab(decoded.pixels, 512, 384);
 */
export function workingLab(px: Pixels, width: number, height: number): LabPlanes {
  const mean = areaMean(px, width, height);
  return srgbToLab(mean.data, mean.channels);
}
