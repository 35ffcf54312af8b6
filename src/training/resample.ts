/**
 * Resampling of plain planes for training: area-average downscaling of decoded photos, bilinear
 * sampling of square crops (with scale and mirror), and bilinear upsampling of the model's
 * quarter-resolution a*b* back to the evaluation size. Pure typed-array code, no sharp.
 */
import type { Pixels } from '../image/index.js';

/** Interleaved RGB, floats 0-1 (sRGB-encoded), the shape the colour module converts to CIELAB. */
export interface FloatRgb {
  width: number;
  height: number;
  data: Float32Array;
}

/**
 * Shrinks decoded pixels so the long side is at most `maxSide`, averaging every source pixel that falls
 * in an output pixel's footprint (averaging sRGB codes, not linear light: common practice for training
 * data). Grey sources are spread to three equal channels; alpha is dropped.
 * @example
 *   const small = downscaleToFloatRgb(pixels, 384); // small.data.length === small.width * small.height * 3
 */
export function downscaleToFloatRgb(pixels: Pixels, maxSide: number): FloatRgb {
  const { width: sw, height: sh, channels, data } = pixels;
  const max = pixels.depth === 16 ? 65535 : 255;
  const ratio = Math.min(1, maxSide / Math.max(sw, sh));
  const dw = Math.max(1, Math.round(sw * ratio));
  const dh = Math.max(1, Math.round(sh * ratio));
  const colour = channels >= 3;
  const out = new Float32Array(dw * dh * 3);
  // Column footprints, computed once.
  const x0s = new Int32Array(dw);
  const x1s = new Int32Array(dw);
  for (let x = 0; x < dw; x++) {
    x0s[x] = Math.floor((x * sw) / dw);
    x1s[x] = Math.max(x0s[x]! + 1, Math.floor(((x + 1) * sw) / dw));
  }
  const sums = new Float64Array(dw * 3);
  const counts = new Float64Array(dw);
  for (let y = 0; y < dh; y++) {
    const y0 = Math.floor((y * sh) / dh);
    const y1 = Math.max(y0 + 1, Math.floor(((y + 1) * sh) / dh));
    sums.fill(0);
    counts.fill(0);
    for (let sy = y0; sy < y1; sy++) {
      const row = sy * sw * channels;
      for (let x = 0; x < dw; x++) {
        let r = 0;
        let g = 0;
        let b = 0;
        for (let sx = x0s[x]!; sx < x1s[x]!; sx++) {
          const i = row + sx * channels;
          if (colour) {
            r += data[i]!;
            g += data[i + 1]!;
            b += data[i + 2]!;
          } else {
            r += data[i]!;
          }
        }
        sums[x * 3] += r;
        sums[x * 3 + 1] += colour ? g : r;
        sums[x * 3 + 2] += colour ? b : r;
        counts[x] += x1s[x]! - x0s[x]!;
      }
    }
    const o = y * dw * 3;
    for (let x = 0; x < dw; x++) {
      const k = 1 / (counts[x]! * max);
      out[o + x * 3] = sums[x * 3]! * k;
      out[o + x * 3 + 1] = sums[x * 3 + 1]! * k;
      out[o + x * 3 + 2] = sums[x * 3 + 2]! * k;
    }
  }
  return { width: dw, height: dh, data: out };
}

/** Where a square crop comes from: a `side` x `side` source window at (x, y), optionally mirrored. */
export interface CropWindow {
  x: number;
  y: number;
  side: number;
  flip: boolean;
}

/**
 * Samples a window of a plane into `out` (at `offset`, `size` x `size`), bilinearly, with pixel
 * centres aligned (common practice, as in most image libraries' resize).
 * @example
 *   sampleCrop(L, 384, 256, { x: 10, y: 20, side: 160, flip: true }, 128, out, 0);
 */
export function sampleCrop(
  plane: Float32Array,
  width: number,
  height: number,
  window: CropWindow,
  size: number,
  out: Float32Array,
  offset: number,
): void {
  const scale = window.side / size;
  for (let oy = 0; oy < size; oy++) {
    const fy = clamp(window.y + (oy + 0.5) * scale - 0.5, 0, height - 1);
    const y0 = Math.floor(fy);
    const y1 = Math.min(height - 1, y0 + 1);
    const ty = fy - y0;
    for (let ox = 0; ox < size; ox++) {
      const sx = window.flip ? size - 1 - ox : ox;
      const fx = clamp(window.x + (sx + 0.5) * scale - 0.5, 0, width - 1);
      const x0 = Math.floor(fx);
      const x1 = Math.min(width - 1, x0 + 1);
      const tx = fx - x0;
      const top = plane[y0 * width + x0]! * (1 - tx) + plane[y0 * width + x1]! * tx;
      const bottom = plane[y1 * width + x0]! * (1 - tx) + plane[y1 * width + x1]! * tx;
      out[offset + oy * size + ox] = top * (1 - ty) + bottom * ty;
    }
  }
}

/**
 * Bilinear resize of a plane to `width` x `height`, pixel centres aligned.
 * @example
 *   const a = resizeBilinear(quarterA, 96, 64, 384, 256);
 */
export function resizeBilinear(plane: Float32Array, sw: number, sh: number, width: number, height: number): Float32Array {
  const out = new Float32Array(width * height);
  const kx = sw / width;
  const ky = sh / height;
  for (let y = 0; y < height; y++) {
    const fy = clamp((y + 0.5) * ky - 0.5, 0, sh - 1);
    const y0 = Math.floor(fy);
    const y1 = Math.min(sh - 1, y0 + 1);
    const ty = fy - y0;
    for (let x = 0; x < width; x++) {
      const fx = clamp((x + 0.5) * kx - 0.5, 0, sw - 1);
      const x0 = Math.floor(fx);
      const x1 = Math.min(sw - 1, x0 + 1);
      const tx = fx - x0;
      const top = plane[y0 * sw + x0]! * (1 - tx) + plane[y0 * sw + x1]! * tx;
      const bottom = plane[y1 * sw + x0]! * (1 - tx) + plane[y1 * sw + x1]! * tx;
      out[y * width + x] = top * (1 - ty) + bottom * ty;
    }
  }
  return out;
}

function clamp(v: number, lo: number, hi: number): number {
  return v < lo ? lo : v > hi ? hi : v;
}
