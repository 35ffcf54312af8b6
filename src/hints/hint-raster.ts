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
export function rasteriseHints(
  hints: Hints,
  L: Float32Array,
  width: number,
  height: number,
  scanWidth: number,
  scanHeight: number,
): RasterisedHints {
  const n = width * height;
  const a = new Float32Array(n),
    b = new Float32Array(n);
  const grid = new FreeCells(width, height);
  // Hint coordinates -> working-grid coordinates (pixel centres at +0.5).
  const sx = width / hints.width,
    sy = height / hints.height;
  const adjustments: GamutAdjustment[] = [];
  // Where entries overlap the later one wins. Drawing from the last entry back and colouring only cells still
  // free gives that, and colours each cell once: the cost is bounded by the grid, not by entries x their area.
  for (let k = hints.entries.length - 1; k >= 0 && grid.painted < n; k--) {
    const entry = hints.entries[k]!;
    const lch = hintLch(entry.rgb);
    let minChroma = lch.chroma,
      lo = Infinity,
      hi = -Infinity;
    cover(entry, sx, sy, grid, (i) => {
      const Li = L[i]!;
      const c = chromaAt(Li, lch.chroma, lch.hue);
      a[i] = c * Math.cos(lch.hue);
      b[i] = c * Math.sin(lch.hue);
      minChroma = Math.min(minChroma, c);
      lo = Math.min(lo, Li);
      hi = Math.max(hi, Li);
    });
    // Report a reduction people could see (over one CIELAB unit of chroma).
    if (lo <= hi && lch.chroma - minChroma > 1) {
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
        message:
          `entry ${entry.number} (${entry.colour}): the scan's lightness there (L* ${round1(lo)} to ${round1(hi)}) ` +
          `cannot hold that colour's chroma of ${round1(lch.chroma)}; chroma was reduced to as little as ${round1(minChroma)}, ` +
          `the same hue, e.g. ${instead} at L* ${round1(mid)}`,
      });
    }
  }
  adjustments.reverse();
  const scaled =
    hints.width === scanWidth && hints.height === scanHeight
      ? undefined
      : `the hints were made for ${hints.width} x ${hints.height}; scaled to the scan's ${scanWidth} x ${scanHeight}`;
  return { constraints: { fixed: grid.fixed, a, b }, pixels: grid.painted, adjustments, ...(scaled ? { scaled } : {}) };
}

/**
 * Whether a hints file fits a scan: the same size, or the same picture at another size (aspect ratio
 * within 1%). Returns a problem sentence, or null when it fits.
 */
export function checkHintsSize(hints: Hints, scanWidth: number, scanHeight: number): string | null {
  if (hints.width === scanWidth && hints.height === scanHeight) return null;
  const ratio = hints.width / hints.height / (scanWidth / scanHeight);
  if (Math.abs(ratio - 1) <= 0.01) return null;
  return `the hints were made for a ${hints.width} x ${hints.height} image but the scan is ${scanWidth} x ${scanHeight}`;
}

/**
 * The working grid's cells not yet taken by a hint: per row, a pointer to the next free column (path
 * halving keeps each lookup near constant), and a count, so a full row is passed over at once.
 */
class FreeCells {
  readonly fixed: Uint8Array;
  painted = 0;
  private readonly next: Int32Array;
  private readonly freeInRow: Int32Array;

  constructor(
    readonly width: number,
    readonly height: number,
  ) {
    this.fixed = new Uint8Array(width * height);
    // Row y's pointers live at y * (width + 1) + x; x = width is the row's end.
    this.next = new Int32Array((width + 1) * height);
    for (let y = 0; y < height; y++) for (let x = 0; x <= width; x++) this.next[y * (width + 1) + x] = x;
    this.freeInRow = new Int32Array(height).fill(width);
  }

  rowFull(y: number): boolean {
    return this.freeInRow[y] === 0;
  }

  /** The first free column at or after x in row y (width when none). */
  firstFree(y: number, x: number): number {
    const base = y * (this.width + 1);
    const next = this.next;
    while (next[base + x] !== x) {
      const up = next[base + next[base + x]!]!;
      next[base + x] = up;
      x = up;
    }
    return x;
  }

  /** Takes cell (x, y) when it is free; true when it was. */
  take(x: number, y: number): boolean {
    const i = y * this.width + x;
    if (this.fixed[i]) return false;
    this.fixed[i] = 1;
    this.next[y * (this.width + 1) + x] = x + 1;
    this.freeInRow[y]!--;
    this.painted++;
    return true;
  }
}

/**
 * Takes the free grid cells an entry covers, calling `paint` with each cell's index: cells whose centre lies
 * within the radius of its path, and every cell the path crosses.
 */
function cover(entry: HintEntry, sx: number, sy: number, grid: FreeCells, paint: (i: number) => void): void {
  const { width, height } = grid;
  const pts = entry.points.map(([x, y]) => [(x + 0.5) * sx, (y + 0.5) * sy] as const);
  const r = entry.radius * Math.sqrt(sx * sy);
  const take = (x: number, y: number): void => {
    if (grid.take(x, y)) paint(y * width + x);
  };
  const segments = pts.length === 1 ? [[pts[0]!, pts[0]!]] : pts.slice(1).map((p, k) => [pts[k]!, p]);
  for (const [p, q] of segments) {
    const [px, py] = p!,
      [qx, qy] = q!;
    const length = Math.hypot(qx - px, qy - py);
    const steps = Math.max(1, Math.ceil(length * 2));
    for (let k = 0; k <= steps; k++) {
      const u = px + ((qx - px) * k) / steps,
        v = py + ((qy - py) * k) / steps;
      take(Math.min(width - 1, Math.max(0, Math.floor(u))), Math.min(height - 1, Math.max(0, Math.floor(v))));
    }
    if (r <= 0) continue;
    const inside = (x: number, v: number): boolean => distanceToSegment(x + 0.5, v, px, py, qx, qy) <= r;
    const y0 = Math.max(0, Math.floor(Math.min(py, qy) - r)),
      y1 = Math.min(height - 1, Math.ceil(Math.max(py, qy) + r));
    for (let y = y0; y <= y1; y++) {
      if (grid.rowFull(y)) continue;
      const span = rowSpan(y + 0.5, px, py, qx, qy, r, width, inside);
      if (!span) continue;
      for (let x = grid.firstFree(y, span[0]); x <= span[1]; x = grid.firstFree(y, x + 1)) take(x, y);
    }
  }
}

/**
 * The columns of a row (centre height v) whose centres lie within r of segment p-q, as [first, last], or
 * null. The covered shape is convex, so on one row it is one run: found from the path's point nearest the
 * row in height, then its ends by bisection.
 */
function rowSpan(
  v: number,
  px: number,
  py: number,
  qx: number,
  qy: number,
  r: number,
  width: number,
  inside: (x: number, v: number) => boolean,
): [number, number] | null {
  let u: number;
  if (py !== qy && v >= Math.min(py, qy) && v <= Math.max(py, qy)) u = px + ((qx - px) * (v - py)) / (qy - py);
  else u = Math.abs(v - py) <= Math.abs(v - qy) ? px : qx;
  // The run contains u when it exists; the cell centres either side of u are the only candidates to start from.
  const left = Math.min(width - 1, Math.max(0, Math.floor(u - 0.5)));
  const start = inside(left, v) ? left : left + 1 < width && inside(left + 1, v) ? left + 1 : -1;
  if (start < 0) return null;
  let lo = 0,
    hi = start; // first inside column in [lo, hi]
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (inside(mid, v)) hi = mid;
    else lo = mid + 1;
  }
  const first = lo;
  lo = start;
  hi = width - 1; // last inside column in [lo, hi]
  while (lo < hi) {
    const mid = (lo + hi + 1) >> 1;
    if (inside(mid, v)) lo = mid;
    else hi = mid - 1;
  }
  return [first, lo];
}

function distanceToSegment(x: number, y: number, px: number, py: number, qx: number, qy: number): number {
  const dx = qx - px,
    dy = qy - py;
  const len2 = dx * dx + dy * dy;
  const t = len2 > 0 ? Math.max(0, Math.min(1, ((x - px) * dx + (y - py) * dy) / len2)) : 0;
  return Math.hypot(x - px - t * dx, y - py - t * dy);
}

function round1(v: number): number {
  return Math.round(v * 10) / 10;
}
