/**
 * The quantised a*b* output space of Zhang, Isola & Efros (2016): square cells of `grid` units
 * centred on multiples of `grid`, keeping the cells that sRGB colours fall into. Derived from the
 * sRGB gamut test, never listed by hand.
 */
import { inSrgbGamut } from '../colour/index.js';

export interface AbBins {
  /** a* of each bin centre. */
  a: Float32Array;
  /** b* of each bin centre. */
  b: Float32Array;
  /** Number of bins (Q). */
  count: number;
  /** Cell size in a*b* units. */
  grid: number;
}

/** Largest |a*|, |b*| of any sRGB colour is below 115 (blue: b* = -107.9); cells reach 120. */
const REACH = 120;
/** L* sweep step and the number of sub-samples per cell side used by the gamut test. */
const L_STEP = 0.5;
const CELL_SAMPLES = 5;

const cache = new Map<number, AbBins>();

function cellInGamut(ca: number, cb: number, grid: number): boolean {
  // Sample the cell (edges included) and sweep L*; one sRGB colour inside is enough.
  for (let i = 0; i < CELL_SAMPLES; i++) {
    const a = ca - grid / 2 + (grid * i) / (CELL_SAMPLES - 1);
    for (let j = 0; j < CELL_SAMPLES; j++) {
      const b = cb - grid / 2 + (grid * j) / (CELL_SAMPLES - 1);
      for (let L = 0; L <= 100; L += L_STEP) if (inSrgbGamut(L, a, b)) return true;
    }
  }
  return false;
}

/**
 * The in-gamut a*b* bins on a square grid: a cell is kept when some colour inside it (sampled on
 * a 5 x 5 lattice including its edges, L* swept 0-100 in steps of 0.5) is an sRGB colour, so the
 * nearest bin centre of every sRGB colour is a bin. Grid 10 gives 262 bins (see tests/model-bins).
 * Cached per grid.
 * @example
 * const bins = abBins(); // bins.count === 262, bins.a[0], bins.b[0] is the first centre
 */
export function abBins(grid = 10): AbBins {
  const cached = cache.get(grid);
  if (cached) return cached;
  if (!(grid > 0) || grid > 100) throw new RangeError(`abBins: grid must be in (0, 100], got ${grid}`);
  const steps = Math.ceil(REACH / grid);
  const a: number[] = [];
  const b: number[] = [];
  for (let i = -steps; i <= steps; i++) {
    for (let j = -steps; j <= steps; j++) {
      if (cellInGamut(i * grid, j * grid, grid)) {
        a.push(i * grid);
        b.push(j * grid);
      }
    }
  }
  const bins: AbBins = { a: Float32Array.from(a), b: Float32Array.from(b), count: a.length, grid };
  cache.set(grid, bins);
  return bins;
}

/**
 * A lookup from grid cell to bin index for fast nearest-bin queries: `cellIndex(a, b)` is the
 * bin whose cell holds (a, b), or -1 outside every bin.
 */
export interface BinLookup {
  bins: AbBins;
  cellIndex(a: number, b: number): number;
}

const lookups = new WeakMap<AbBins, BinLookup>();

/** The cell-to-bin lookup of a bin set (cached). */
export function binLookup(bins: AbBins): BinLookup {
  const cached = lookups.get(bins);
  if (cached) return cached;
  const g = bins.grid;
  let reach = 0;
  for (let q = 0; q < bins.count; q++) reach = Math.max(reach, Math.abs(bins.a[q]), Math.abs(bins.b[q]));
  const half = Math.round(reach / g);
  const side = 2 * half + 1;
  const table = new Int32Array(side * side).fill(-1);
  for (let q = 0; q < bins.count; q++) {
    table[(Math.round(bins.a[q] / g) + half) * side + Math.round(bins.b[q] / g) + half] = q;
  }
  const lookup: BinLookup = {
    bins,
    cellIndex(a: number, b: number): number {
      const i = Math.round(a / g) + half;
      const j = Math.round(b / g) + half;
      if (i < 0 || j < 0 || i >= side || j >= side) return -1;
      return table[i * side + j];
    },
  };
  lookups.set(bins, lookup);
  return lookup;
}

/**
 * Index of the bin centre nearest to (a, b).
 * @example
 * nearestBin(abBins(), 3, -12); // the bin centred on (0, -10)
 */
export function nearestBin(bins: AbBins, a: number, b: number): number {
  const q = binLookup(bins).cellIndex(a, b);
  if (q >= 0) return q;
  let best = 0;
  let bestD = Infinity;
  for (let k = 0; k < bins.count; k++) {
    const da = bins.a[k] - a;
    const db = bins.b[k] - b;
    const d = da * da + db * db;
    if (d < bestD) {
      bestD = d;
      best = k;
    }
  }
  return best;
}
