/**
 * One reading per object: before a colour is chosen, each pixel's predicted distribution over the a*b*
 * bins is averaged with those of the pixels it shares a region with, where a region is what the scan's
 * own L* does not cut. A face, a wall or a coat then gets one hue instead of blotches where the network
 * hesitated between two. The averaging is the recursive edge-aware filter of Gastal & Oliveira 2011
 * ("Domain transform for edge-aware image and video processing"), run on every bin's plane with L* as
 * the guide: three iterations of a left-right, right-left, top-down and bottom-up pass.
 */

/** How far the pooling reaches: spatial sigma in output pixels, range sigma in L* units. */
export interface PoolingSettings {
  spatial: number;
  range: number;
}

/**
 * Defaults of our own: a region may reach a quarter of an 80-pixel-wide output, and an L* step of about
 * 10 (a visible edge) all but stops it.
 */
export const DEFAULT_POOLING: PoolingSettings = { spatial: 20, range: 10 };

const ITERATIONS = 3;

/**
 * Pools `probabilities` ([pixels, q], row-major over a `width` x `height` grid) along the regions of
 * `guide` (L* at the same grid). Returns a new array; each pixel's values still sum to what they did.
 * @example
 * const pooled = poolRegions(p, 262, L, 80, 60, DEFAULT_POOLING);
 */
export function poolRegions(
  probabilities: Float32Array,
  q: number,
  guide: Float32Array,
  width: number,
  height: number,
  settings: PoolingSettings = DEFAULT_POOLING,
): Float32Array {
  if (probabilities.length !== width * height * q || guide.length !== width * height) {
    throw new RangeError(`poolRegions: ${probabilities.length} values and ${guide.length} guide pixels for ${width} x ${height} x ${q}`);
  }
  const out = Float32Array.from(probabilities);
  // Domain distance between neighbours: 1 + (sigma_s / sigma_r) |dL|, per axis.
  const ratio = settings.spatial / settings.range;
  const dx = new Float32Array(width * height);
  const dy = new Float32Array(width * height);
  for (let y = 0; y < height; y++) {
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      dx[i] = x > 0 ? 1 + ratio * Math.abs(guide[i]! - guide[i - 1]!) : 0;
      dy[i] = y > 0 ? 1 + ratio * Math.abs(guide[i]! - guide[i - width]!) : 0;
    }
  }
  const feedback = new Float32Array(Math.max(width, height));
  for (let k = 0; k < ITERATIONS; k++) {
    // The spatial sigma of each iteration, so that the iterations together give sigma_s (equation 14).
    const sigma = (settings.spatial * Math.sqrt(3) * Math.pow(2, ITERATIONS - k - 1)) / Math.sqrt(Math.pow(4, ITERATIONS) - 1);
    const a = Math.exp(-Math.SQRT2 / sigma);
    for (let y = 0; y < height; y++) {
      for (let x = 1; x < width; x++) feedback[x] = Math.pow(a, dx[y * width + x]!);
      passLine(out, q, y * width, 1, width, feedback);
    }
    for (let x = 0; x < width; x++) {
      for (let y = 1; y < height; y++) feedback[y] = Math.pow(a, dy[y * width + x]!);
      passLine(out, q, x, width, height, feedback);
    }
  }
  return out;
}

/** One causal and one anti-causal recursive pass along a line of `count` pixels, `step` pixels apart. */
function passLine(data: Float32Array, q: number, first: number, step: number, count: number, feedback: Float32Array): void {
  for (let j = 1; j < count; j++) {
    const w = feedback[j]!;
    const here = (first + j * step) * q;
    const before = (first + (j - 1) * step) * q;
    for (let c = 0; c < q; c++) data[here + c] = data[here + c]! + w * (data[before + c]! - data[here + c]!);
  }
  for (let j = count - 2; j >= 0; j--) {
    const w = feedback[j + 1]!;
    const here = (first + j * step) * q;
    const after = (first + (j + 1) * step) * q;
    for (let c = 0; c < q; c++) data[here + c] = data[here + c]! + w * (data[after + c]! - data[here + c]!);
  }
}
