/**
 * Resampling of planes and decoded samples, the one place for it: area-average downscaling (decoded
 * samples for restore's working size, training photos and sheet previews; float planes for the rest),
 * fed whole or strip by strip, and bilinear resizing and crop sampling with pixel centres aligned.
 * Restore, scoring, training, hints and the sheet all shrink with the same footprints, so the model
 * sees at restore what it learnt from.
 */

/** Decoded samples: interleaved, `channels` per pixel, integer codes of `depth` bits (structurally image/'s Pixels). */
export interface Samples {
  width: number;
  height: number;
  channels: number;
  depth: 8 | 16;
  data: Uint8Array | Uint16Array;
}

/** Interleaved RGB, floats 0-1 (sRGB-encoded), the shape the colour module converts to CIELAB. */
export interface FloatRgb {
  width: number;
  height: number;
  data: Float32Array;
}

/**
 * The size with long side at most `maxSide` (never larger than the source), aspect kept.
 * @example
 *   fitInside(4000, 3000, 512); // { width: 512, height: 384 }
 */
export function fitInside(width: number, height: number, maxSide: number): { width: number; height: number } {
  const s = Math.min(1, maxSide / Math.max(width, height));
  return { width: Math.max(1, Math.round(width * s)), height: Math.max(1, Math.round(height * s)) };
}

/**
 * Area-averages decoded samples to `width` x `height`: each source pixel falls in the output pixel
 * floor(x * width / W) (likewise for rows), and the codes in each are averaged and scaled to 0-1
 * (sRGB-encoded codes, not linear light: common practice for training data, and what the model learnt
 * from). Colour sources give 3 channels, grey ones 1; alpha is dropped.
 * @example
 *   const { data, channels } = areaMean(pixels, 512, 384);
 */
export function areaMean(px: Samples, width: number, height: number): { data: Float32Array; channels: 1 | 3 } {
  const { width: W, height: H, channels, data } = px;
  const c = channels >= 3 ? 3 : 1;
  const n = width * height;
  const sums = new Float64Array(n * c);
  const counts = new Float64Array(n);
  // Output column cx gathers source columns start[cx] to start[cx + 1] - 1 (floor(x * width / W) is
  // monotonic). A run of one output pixel is summed in locals: adding pixel after pixel into the same
  // array cell makes every addition wait for the last. Sums of integer codes are exact in float64, so the
  // order of the additions does not change the means.
  const start = new Int32Array(width + 1);
  for (let x = 0, cx = 0; x <= W; x++) {
    const to = x === W ? width : Math.min(width - 1, Math.floor((x * width) / W));
    while (cx < to) start[++cx] = x;
  }
  start[width] = W;
  for (let y = 0; y < H; y++) {
    const cellRow = Math.min(height - 1, Math.floor((y * height) / H)) * width;
    const rowStart = y * W * channels;
    for (let cx = 0; cx < width; cx++) {
      const x0 = start[cx]!;
      const x1 = start[cx + 1]!;
      const cell = cellRow + cx;
      const end = rowStart + x1 * channels;
      if (c === 3) {
        let r = 0,
          g = 0,
          b = 0;
        for (let i = rowStart + x0 * channels; i < end; i += channels) {
          r += data[i]!;
          g += data[i + 1]!;
          b += data[i + 2]!;
        }
        sums[cell * 3] += r;
        sums[cell * 3 + 1] += g;
        sums[cell * 3 + 2] += b;
      } else {
        let v = 0;
        for (let i = rowStart + x0 * channels; i < end; i += channels) v += data[i]!;
        sums[cell] += v;
      }
      counts[cell] += x1 - x0;
    }
  }
  const max = px.depth === 16 ? 65535 : 255;
  const mean = new Float32Array(n * c);
  for (let k = 0; k < n; k++) {
    const f = counts[k]! > 0 ? 1 / (counts[k]! * max) : 0;
    for (let j = 0; j < c; j++) mean[k * c + j] = sums[k * c + j]! * f;
  }
  return { data: mean, channels: c };
}

/**
 * Shrinks decoded samples so the long side is at most `maxSide` (areaMean), as RGB: grey sources are
 * spread to three equal channels.
 * @example
 *   const small = downscaleToFloatRgb(pixels, 384); // small.data.length === small.width * small.height * 3
 */
export function downscaleToFloatRgb(px: Samples, maxSide: number): FloatRgb {
  const { width, height } = fitInside(px.width, px.height, maxSide);
  const mean = areaMean(px, width, height);
  if (mean.channels === 3) return { width, height, data: mean.data };
  const data = new Float32Array(width * height * 3);
  for (let i = 0; i < width * height; i++) data[i * 3] = data[i * 3 + 1] = data[i * 3 + 2] = mean.data[i]!;
  return { width, height, data };
}

/**
 * Bilinear resize of one plane, pixel centres aligned (common practice, as libvips and most resizers do).
 * @example
 *   const a512 = resizePlane(a128, 128, 96, 512, 384);
 */
export function resizePlane(plane: Float32Array, sw: number, sh: number, width: number, height: number): Float32Array {
  const out = new Float32Array(width * height);
  resizeRows(plane, sw, sh, width, height, 0, height, out);
  return out;
}

/**
 * Rows `y0` to `y0 + rows - 1` of a bilinear resize of a plane to `width` x `height`, written row-major
 * into `out` (which holds just those rows).
 * @example
 *   resizeRows(conf128, 128, 96, 4000, 3000, 256, 64, strip);
 */
export function resizeRows(
  plane: Float32Array,
  sw: number,
  sh: number,
  width: number,
  height: number,
  y0: number,
  rows: number,
  out: Float32Array,
): void {
  const c0 = new Int32Array(width);
  const c1 = new Int32Array(width);
  const tx = new Float32Array(width);
  for (let x = 0; x < width; x++) [c0[x], c1[x], tx[x]] = gridPoint(x, width, sw, 1, sw);
  for (let j = 0; j < rows; j++) {
    const [r0, r1, ty] = gridPoint(y0 + j, height, sh, 1, sh);
    const o0 = r0 * sw;
    const o1 = r1 * sw;
    const base = j * width;
    for (let x = 0; x < width; x++) {
      const p = c0[x]!;
      const q = c1[x]!;
      const t = tx[x]!;
      const top = plane[o0 + p]! + (plane[o0 + q]! - plane[o0 + p]!) * t;
      const bottom = plane[o1 + p]! + (plane[o1 + q]! - plane[o1 + p]!) * t;
      out[base + x] = top + (bottom - top) * ty;
    }
  }
}

/**
 * Area-average downscaling of one plane to `width` x `height` (each output pixel the mean of the source
 * pixels its footprint covers, as in the model's training data).
 * @example
 *   const small = shrinkPlane(L, 4000, 3000, 512, 384);
 */
export function shrinkPlane(plane: Float32Array, sw: number, sh: number, width: number, height: number): Float32Array {
  const acc = new PlaneShrinker(sw, sh, width, height);
  acc.addRows(plane, 0, sh);
  return acc.result();
}

/**
 * Area-average downscaling fed strip by strip, for sources too large to hold as one float plane.
 * @example
 *   const s = new PlaneShrinker(40000, 2500, 512, 32);
 *   for (const strip of strips) s.addRows(strip.L, strip.y0, strip.rows);
 *   const small = s.result();
 */
export class PlaneShrinker {
  private readonly sums: Float64Array;
  private readonly counts: Float64Array;
  private readonly colOf: Int32Array;

  constructor(
    private readonly sw: number,
    private readonly sh: number,
    readonly width: number,
    readonly height: number,
  ) {
    this.sums = new Float64Array(width * height);
    this.counts = new Float64Array(width * height);
    this.colOf = new Int32Array(sw);
    for (let x = 0; x < sw; x++) this.colOf[x] = Math.min(width - 1, Math.floor((x * width) / sw));
  }

  /** Adds `rows` source rows starting at source row `y0` (`plane` holds just those rows). */
  addRows(plane: Float32Array, y0: number, rows: number): void {
    const { sw, sh, width, height, sums, counts, colOf } = this;
    for (let j = 0; j < rows; j++) {
      const oy = Math.min(height - 1, Math.floor(((y0 + j) * height) / sh));
      const o = oy * width;
      const base = j * sw;
      for (let x = 0; x < sw; x++) {
        sums[o + colOf[x]!] += plane[base + x]!;
        counts[o + colOf[x]!]! += 1;
      }
    }
  }

  result(): Float32Array {
    const out = new Float32Array(this.width * this.height);
    for (let i = 0; i < out.length; i++) out[i] = this.counts[i]! > 0 ? this.sums[i]! / this.counts[i]! : 0;
    return out;
  }
}

/**
 * Where full-resolution index i (of n) falls on a grid whose cells cover `cell` low-resolution pixels of
 * m in all (g cells): the two neighbouring cells and the weight of the second. Pixel centres aligned.
 */
export function gridPoint(i: number, n: number, m: number, cell: number, g: number): [number, number, number] {
  let f = (((i + 0.5) * m) / n - 0.5 - (cell - 1) / 2) / cell;
  if (f < 0) f = 0;
  if (f > g - 1) f = g - 1;
  const i0 = Math.floor(f);
  const i1 = Math.min(g - 1, i0 + 1);
  return [i0, i1, f - i0];
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

function clamp(v: number, lo: number, hi: number): number {
  return v < lo ? lo : v > hi ? hi : v;
}
