/**
 * Edge-aware upsampling of a*b* guided by L*: joint bilateral upsampling (Kopf, Cohen, Lischinski &
 * Uyttendaele 2007) computed on a bilateral grid (Chen, Paris & Durand 2007). Each low-resolution colour
 * sample is splatted into a 3-D grid over (x, y, L*); the grid is blurred; every full-resolution pixel then
 * reads the grid at its own position and its own L*, so it takes its colour from nearby samples of similar
 * lightness and colour stops at the edges of the scan's lightness. Unlike a linear guided fit, the result
 * is always a weighted mean of predicted colours, so film grain in L* does not turn into colour noise.
 * The full-resolution stage works row by row, so huge images are processed in strips.
 */
import { gridPoint } from './resample.js';

export interface BilateralUpsampleOptions {
  /** Grid cell side in low-resolution pixels. Default 1. */
  cell?: number;
  /**
   * Grid step along L* (L* units). Colour from samples more than about two steps darker or lighter is
   * ignored. Default 5: above the L* spread of film grain at the working size, below the contrast of
   * an edge worth keeping colour apart at (common practice for bilateral grids: sigma_r near 0.05-0.1 of range).
   */
  rangeStep?: number;
  /** Passes of the [1 2 1] blur across x and y. Default 1. */
  blurPasses?: number;
  /** Optional per-sample weights (for example the model's confidence), low-resolution size. */
  weights?: Float32Array;
}

/** A blurred bilateral grid of homogeneous (w*a, w*b, w) triples, ready to be read at full resolution. */
export interface BilateralGrid {
  /** Grid size: x cells, y cells, L* levels. */
  gw: number;
  gh: number;
  gz: number;
  rangeStep: number;
  /** Low-resolution size and the cell side, to map full-resolution pixels onto the grid. */
  width: number;
  height: number;
  cell: number;
  /** Interleaved [y][x][z][a, b, w]. */
  data: Float32Array;
}

/** Weight of the spatially blurred plain colour every grid cell gets, so no pixel reads an empty grid. */
const BACKGROUND = 1e-3;

/**
 * Builds the grid from low-resolution L* (averaged over each sample's footprint) and a*, b*.
 * @example
 *   const grid = bilateralGrid(lowL, lowA, lowB, 128, 96);
 *   const out = { a: new Float32Array(512 * 384), b: new Float32Array(512 * 384) };
 *   sliceRows(grid, fullL, 512, 384, 0, 384, out.a, out.b);
 */
export function bilateralGrid(
  guide: Float32Array,
  a: Float32Array,
  b: Float32Array,
  width: number,
  height: number,
  options: BilateralUpsampleOptions = {},
): BilateralGrid {
  const cell = Math.max(1, Math.round(options.cell ?? 1));
  const step = options.rangeStep ?? 5;
  const gw = Math.ceil(width / cell);
  const gh = Math.ceil(height / cell);
  const gz = Math.ceil(100 / step) + 1;
  const data = new Float32Array(gw * gh * gz * 3);
  const plain = new Float32Array(gw * gh * 3);
  const weights = options.weights;
  for (let y = 0; y < height; y++) {
    const gy = (y / cell) | 0;
    for (let x = 0; x < width; x++) {
      const i = y * width + x;
      const w = weights ? Math.max(1e-6, weights[i]!) : 1;
      const av = a[i]!;
      const bv = b[i]!;
      const gxy = gy * gw + ((x / cell) | 0);
      let z = clamp(guide[i]! / step, 0, gz - 1);
      const z0 = Math.min(gz - 2, Math.floor(z));
      z -= z0;
      const o = (gxy * gz + z0) * 3;
      const w0 = w * (1 - z);
      const w1 = w * z;
      data[o] += w0 * av;
      data[o + 1] += w0 * bv;
      data[o + 2] += w0;
      data[o + 3] += w1 * av;
      data[o + 4] += w1 * bv;
      data[o + 5] += w1;
      plain[gxy * 3] += w * av;
      plain[gxy * 3 + 1] += w * bv;
      plain[gxy * 3 + 2] += w;
    }
  }
  // Blur [1 2 1] / 4 along each axis (twice in x and y: colour fills each L* level a few cells out).
  const cellStride = gz * 3;
  const rowStride = gw * cellStride;
  for (let pass = 0; pass < (options.blurPasses ?? 1); pass++) {
    blurAxis(data, gh, rowStride, gw, cellStride, cellStride); // x
    blurAxis(data, 1, 0, gh, rowStride, rowStride); // y
  }
  blurAxis(data, gw * gh, cellStride, gz, 3, 3); // L*
  blurAxis(plain, gh, gw * 3, gw, 3, 3);
  blurAxis(plain, 1, 0, gh, gw * 3, gw * 3);
  for (let g = 0; g < gw * gh; g++) {
    const pw = plain[g * 3 + 2]!;
    if (!(pw > 0)) continue;
    const pa = (BACKGROUND * plain[g * 3]!) / pw;
    const pb = (BACKGROUND * plain[g * 3 + 1]!) / pw;
    for (let z = 0; z < gz; z++) {
      const o = (g * gz + z) * 3;
      data[o] += pa;
      data[o + 1] += pb;
      data[o + 2] += BACKGROUND;
    }
  }
  return { gw, gh, gz, rangeStep: step, width, height, cell, data };
}

/**
 * Reads the grid for `rows` full-resolution rows of L* starting at row `y0` of a `fullWidth` x
 * `fullHeight` image, writing a* and b* for those rows (row-major from row y0).
 * @example
 *   sliceRows(grid, stripL, 4000, 3000, 256, 64, stripA, stripB);
 */
export function sliceRows(
  grid: BilateralGrid,
  L: Float32Array,
  fullWidth: number,
  fullHeight: number,
  y0: number,
  rows: number,
  outA: Float32Array,
  outB: Float32Array,
): void {
  new GridReader(grid, fullWidth, fullHeight).read(L, y0, rows, outA, outB);
}

/**
 * sliceRows for one image read in many small bands: each column's grid position is worked out once, and
 * the blend of the two grid rows around a pixel row is kept from one band to the next.
 * @example
 *   const reader = new GridReader(grid, 4000, 3000);
 *   for (let y = 0; y < 3000; y += 8) reader.read(bandL, y, 8, bandA, bandB);
 */
export class GridReader {
  private readonly cx0: Int32Array;
  private readonly cx1: Int32Array;
  private readonly ctx: Float32Array;
  private readonly row: Float32Array;
  private lastKey = -1;

  constructor(
    private readonly grid: BilateralGrid,
    private readonly fullWidth: number,
    private readonly fullHeight: number,
  ) {
    const { gw, gz, cell } = grid;
    const cellStride = gz * 3;
    this.cx0 = new Int32Array(fullWidth);
    this.cx1 = new Int32Array(fullWidth);
    this.ctx = new Float32Array(fullWidth);
    for (let x = 0; x < fullWidth; x++) {
      const [i0, i1, t] = gridPoint(x, fullWidth, grid.width, cell, gw);
      this.cx0[x] = i0 * cellStride;
      this.cx1[x] = i1 * cellStride;
      this.ctx[x] = t;
    }
    this.row = new Float32Array(gw * cellStride);
  }

  /** a* and b* of `rows` rows from `y0`, read at the L* given for them (row-major from row y0). */
  read(L: Float32Array, y0: number, rows: number, outA: Float32Array, outB: Float32Array): void {
    const { gh, gz, data, cell } = this.grid;
    const { cx0, cx1, ctx, row, fullWidth } = this;
    const zMax = gz - 1;
    const inv = 1 / this.grid.rangeStep;
    const rowStride = row.length;
    for (let j = 0; j < rows; j++) {
      // The two grid rows around a pixel row, blended once per row: each pixel then reads 2 x 2 x 3 values.
      const [r0, r1, ty] = gridPoint(y0 + j, this.fullHeight, this.grid.height, cell, gh);
      const key = r0 * 4096 + Math.round(ty * 4095);
      if (key !== this.lastKey) {
        this.lastKey = key;
        const o0 = r0 * rowStride;
        const o1 = r1 * rowStride;
        const uy = 1 - ty;
        for (let k = 0; k < rowStride; k++) row[k] = uy * data[o0 + k]! + ty * data[o1 + k]!;
      }
      const base = j * fullWidth;
      for (let x = 0; x < fullWidth; x++) {
        let z = L[base + x]! * inv;
        if (!(z > 0)) z = 0;
        else if (z > zMax) z = zMax;
        let z0 = z | 0;
        if (z0 > gz - 2) z0 = gz - 2;
        const tz = z - z0;
        const uz = 1 - tz;
        const tx = ctx[x]!;
        const ux = 1 - tx;
        const p = cx0[x]! + z0 * 3;
        const q = cx1[x]! + z0 * 3;
        const sa = ux * (uz * row[p]! + tz * row[p + 3]!) + tx * (uz * row[q]! + tz * row[q + 3]!);
        const sb = ux * (uz * row[p + 1]! + tz * row[p + 4]!) + tx * (uz * row[q + 1]! + tz * row[q + 4]!);
        const sw = ux * (uz * row[p + 2]! + tz * row[p + 5]!) + tx * (uz * row[q + 2]! + tz * row[q + 5]!);
        // Every cell holds the background weight, so sw > 0.
        const r = 1 / sw;
        outA[base + x] = sa * r;
        outB[base + x] = sb * r;
      }
    }
  }
}

/**
 * Edge-aware upsampling of whole planes. For images too large to hold as float planes, build the grid
 * once with bilateralGrid and call sliceRows strip by strip.
 * @example
 *   const { a, b } = bilateralUpsample(lowL, lowA, lowB, 128, 96, fullL, 512, 384);
 */
export function bilateralUpsample(
  lowL: Float32Array,
  lowA: Float32Array,
  lowB: Float32Array,
  width: number,
  height: number,
  fullL: Float32Array,
  fullWidth: number,
  fullHeight: number,
  options: BilateralUpsampleOptions = {},
): { a: Float32Array; b: Float32Array } {
  const grid = bilateralGrid(lowL, lowA, lowB, width, height, options);
  const a = new Float32Array(fullWidth * fullHeight);
  const b = new Float32Array(fullWidth * fullHeight);
  sliceRows(grid, fullL, fullWidth, fullHeight, 0, fullHeight, a, b);
  return { a, b };
}

/**
 * In-place [1 2 1] / 4 blur along one axis of an interleaved array, ends clamped: `outer` blocks
 * `outerStride` apart, each a line of `count` cells `stride` apart, each cell `inner` contiguous values.
 */
function blurAxis(data: Float32Array, outer: number, outerStride: number, count: number, stride: number, inner: number): void {
  if (count < 2) return;
  const prev = new Float32Array(inner);
  for (let o = 0; o < outer; o++) {
    const start = o * outerStride;
    for (let k = 0; k < inner; k++) prev[k] = data[start + k]!;
    for (let c = 0; c < count; c++) {
      const p = start + c * stride;
      const next = c + 1 < count ? p + stride : p;
      for (let k = 0; k < inner; k++) {
        const cur = data[p + k]!;
        data[p + k] = 0.25 * prev[k]! + 0.5 * cur + 0.25 * data[next + k]!;
        prev[k] = cur;
      }
    }
  }
}

function clamp(v: number, lo: number, hi: number): number {
  return v < lo ? lo : v > hi ? hi : v;
}
