/**
 * Hints file entries drawn onto the working-size grid: which pixels are held fixed, and at what a*b*
 * (the hint's hue and chroma at each pixel's own L*, reduced where sRGB cannot hold it).
 */
import type { HintConstraints } from './propagate.js';
import type { HintEntry, Hints } from './hints-file.js';
import { chromaAt, hexAt, hintLch } from './hint-colour.js';

/** A hint whose colour had to be weakened at the scan's lightness. */
export interface GamutAdjustment {
  entry: number;
  colour: string;
  /** Chroma of the colour as written. */
  requestedChroma: number;
  /** The smallest chroma used over the hint's pixels. */
  usedChroma: number;
  /** L* range of the scan under the hint. */
  lightness: [number, number];
  /** The colour used at the hint's middle lightness, as hex. */
  usedInstead: string;
  /** One sentence for people. */
  message: string;
}

export interface RasterisedHints {
  constraints: HintConstraints;
  /** Pixels held fixed. */
  pixels: number;
  adjustments: GamutAdjustment[];
  /** Set when the hints file was made for another size of this scan and its coordinates were scaled. */
  scaled?: string;
}

/**
 * Draws the hints onto a `width` x `height` grid holding the scan's L* (0-100). `scanWidth` x `scanHeight`
 * is the scan's own size; a hints file made for the same picture at another size (same aspect ratio,
 * within 1%) is scaled to it, any other size is refused by the caller (see `checkHintsSize`).
 *
 * @example
 *   const { constraints, adjustments } = rasteriseHints(hints, work.L, 512, 384, 4000, 3000);
 */
export function rasteriseHints(hints: Hints, L: Float32Array, width: number, height: number, scanWidth: number, scanHeight: number): RasterisedHints {
  const n = width * height;
  const fixed = new Uint8Array(n), a = new Float32Array(n), b = new Float32Array(n);
  // Hint coordinates -> working-grid coordinates (pixel centres at +0.5).
  const sx = width / hints.width, sy = height / hints.height;
  const adjustments: GamutAdjustment[] = [];
  for (const entry of hints.entries) {
    const cells = cover(entry, sx, sy, width, height);
    const lch = hintLch(entry.rgb);
    let minChroma = lch.chroma, lo = Infinity, hi = -Infinity;
    for (const i of cells) {
      const Li = L[i]!;
      const c = chromaAt(Li, lch.chroma, lch.hue);
      fixed[i] = 1;
      a[i] = c * Math.cos(lch.hue);
      b[i] = c * Math.sin(lch.hue);
      minChroma = Math.min(minChroma, c);
      lo = Math.min(lo, Li);
      hi = Math.max(hi, Li);
    }
    // Report a reduction people could see (over one CIELAB unit of chroma).
    if (cells.length && lch.chroma - minChroma > 1) {
      const mid = (lo + hi) / 2;
      const usedMid = chromaAt(mid, lch.chroma, lch.hue);
      const instead = hexAt(mid, usedMid, lch.hue);
      adjustments.push({
        entry: entry.number,
        colour: entry.colour,
        requestedChroma: round1(lch.chroma),
        usedChroma: round1(minChroma),
        lightness: [round1(lo), round1(hi)],
        usedInstead: instead,
        message: `entry ${entry.number} (${entry.colour}): the scan's lightness there (L* ${round1(lo)} to ${round1(hi)}) `
          + `cannot hold that colour's chroma of ${round1(lch.chroma)}; chroma was reduced to as little as ${round1(minChroma)}, `
          + `the same hue, e.g. ${instead} at L* ${round1(mid)}`,
      });
    }
  }
  const scaled = hints.width === scanWidth && hints.height === scanHeight ? undefined
    : `the hints were made for ${hints.width} x ${hints.height}; scaled to the scan's ${scanWidth} x ${scanHeight}`;
  let pixels = 0;
  for (let i = 0; i < n; i++) pixels += fixed[i]!;
  return { constraints: { fixed, a, b }, pixels, adjustments, ...(scaled ? { scaled } : {}) };
}

/**
 * Whether a hints file fits a scan: the same size, or the same picture at another size (aspect ratio
 * within 1%). Returns a problem sentence, or null when it fits.
 */
export function checkHintsSize(hints: Hints, scanWidth: number, scanHeight: number): string | null {
  if (hints.width === scanWidth && hints.height === scanHeight) return null;
  const ratio = (hints.width / hints.height) / (scanWidth / scanHeight);
  if (Math.abs(ratio - 1) <= 0.01) return null;
  return `the hints were made for a ${hints.width} x ${hints.height} image but the scan is ${scanWidth} x ${scanHeight}`;
}

/** Grid cells an entry covers: pixels whose centre lies within the radius of its path, and every cell the path crosses. */
function cover(entry: HintEntry, sx: number, sy: number, width: number, height: number): number[] {
  const pts = entry.points.map(([x, y]) => [(x + 0.5) * sx, (y + 0.5) * sy] as const);
  const r = entry.radius * Math.sqrt(sx * sy);
  const cells = new Set<number>();
  const mark = (u: number, v: number): void => {
    const x = Math.min(width - 1, Math.max(0, Math.floor(u))), y = Math.min(height - 1, Math.max(0, Math.floor(v)));
    cells.add(y * width + x);
  };
  const segments = pts.length === 1 ? [[pts[0]!, pts[0]!]] : pts.slice(1).map((p, k) => [pts[k]!, p]);
  for (const [p, q] of segments) {
    const [px, py] = p!, [qx, qy] = q!;
    const length = Math.hypot(qx - px, qy - py);
    const steps = Math.max(1, Math.ceil(length * 2));
    for (let k = 0; k <= steps; k++) mark(px + ((qx - px) * k) / steps, py + ((qy - py) * k) / steps);
    if (r <= 0) continue;
    const x0 = Math.max(0, Math.floor(Math.min(px, qx) - r)), x1 = Math.min(width - 1, Math.ceil(Math.max(px, qx) + r));
    const y0 = Math.max(0, Math.floor(Math.min(py, qy) - r)), y1 = Math.min(height - 1, Math.ceil(Math.max(py, qy) + r));
    for (let y = y0; y <= y1; y++) {
      for (let x = x0; x <= x1; x++) {
        if (distanceToSegment(x + 0.5, y + 0.5, px, py, qx, qy) <= r) cells.add(y * width + x);
      }
    }
  }
  return [...cells];
}

function distanceToSegment(x: number, y: number, px: number, py: number, qx: number, qy: number): number {
  const dx = qx - px, dy = qy - py;
  const len2 = dx * dx + dy * dy;
  const t = len2 > 0 ? Math.max(0, Math.min(1, ((x - px) * dx + (y - py) * dy) / len2)) : 0;
  return Math.hypot(x - px - t * dx, y - py - t * dy);
}

function round1(v: number): number {
  return Math.round(v * 10) / 10;
}
