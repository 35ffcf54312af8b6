/**
 * Stage 5, render: the working colour carried to full resolution by a bilateral grid guided by the scan's
 * own L*, kept inside the sRGB gamut at that L*, and converted with it to sRGB at the output depth, alpha
 * kept. Runs in bands of a few rows, so a 100-megapixel scan never exists as float planes.
 */
import {
  bilateralGrid,
  greyToLightness,
  labToSrgb,
  limitChroma,
  GridReader,
  type BilateralGrid,
  type WorkingColour,
} from '../../colour/index.js';
import type { BitDepth, Pixels } from '../../image/index.js';

/** Bilateral grid settings from the working size to full size (cells of 2). */
const TO_FULL_SIZE = { rangeStep: 4, cell: 2 };

/**
 * The grid that carries working-size colour to full resolution (read it with sliceRows).
 * @example
 *   const grid = fullSizeGrid(colour);
 */
export function fullSizeGrid(colour: WorkingColour): BilateralGrid {
  return bilateralGrid(colour.L, colour.a, colour.b, colour.width, colour.height, TO_FULL_SIZE);
}

/**
 * Rows per band: about 32 thousand pixels, so a band's L*, a* and b* (and its samples) stay in the
 * processor's cache from one step to the next, whatever the image size.
 */
function bandRows(width: number): number {
  return Math.max(1, Math.floor((1 << 15) / width));
}

/**
 * The scan's own L* with the working colour's a*b*, as sRGB samples at `depth` (with the scan's alpha).
 * @example
 *   const image = render(decoded.pixels, colour, 8);
 */
export function render(px: Pixels, colour: WorkingColour, depth: BitDepth): Pixels {
  const { width: W, height: H, channels } = px;
  const reader = new GridReader(fullSizeGrid(colour), W, H);
  const alpha = channels === 2 || channels === 4;
  const outChannels = alpha ? 4 : 3;
  const out = depth === 16 ? new Uint16Array(W * H * outChannels) : new Uint8Array(W * H * outChannels);
  const rowsPer = bandRows(W);
  const L = new Float32Array(rowsPer * W);
  const a = new Float32Array(rowsPer * W);
  const b = new Float32Array(rowsPer * W);
  for (let y = 0; y < H; y += rowsPer) {
    const rows = Math.min(rowsPer, H - y);
    const n = rows * W;
    const strip = stripOf(px, y, rows);
    const band = { L: greyToLightness(strip, channels, L), a: a.subarray(0, n), b: b.subarray(0, n) };
    reader.read(band.L, y, rows, band.a, band.b);
    limitChroma(band.L, band.a, band.b);
    const target = out.subarray(y * W * outChannels, (y + rows) * W * outChannels);
    labToSrgb(band, target, outChannels);
    if (alpha) copyAlpha(strip, channels, px.depth, target, depth);
  }
  return { width: W, height: H, channels: outChannels, depth, data: out } as Pixels;
}

/**
 * The model's confidence as 8-bit grey (white = confident) at the model's output size.
 * @example
 *   const grey = confidenceGrey(colour);
 */
export function confidenceGrey(colour: WorkingColour): Uint8Array {
  return Uint8Array.from(colour.confidence, (v) => Math.round(Math.min(1, Math.max(0, v)) * 255));
}

/** Rows y to y + rows of the interleaved samples, without copying. */
function stripOf(px: Pixels, y: number, rows: number): Uint8Array | Uint16Array {
  const per = px.width * px.channels;
  return px.data.subarray(y * per, (y + rows) * per);
}

/** Copies the source's alpha into the last channel of the output strip, converting depth if needed. */
function copyAlpha(
  src: Uint8Array | Uint16Array,
  channels: number,
  srcDepth: BitDepth,
  out: Uint8Array | Uint16Array,
  outDepth: BitDepth,
): void {
  const n = src.length / channels;
  const scale = srcDepth === outDepth ? 1 : outDepth === 8 ? 255 / 65535 : 65535 / 255;
  for (let i = 0; i < n; i++) out[i * 4 + 3] = Math.round(src[i * channels + channels - 1]! * scale);
}
