/**
 * Keeps new colour inside the sRGB gamut without touching lightness: where (L*, a*, b*) would fall
 * outside sRGB, chroma is reduced at constant L* and hue (rather than clipping each RGB channel, which
 * shifts L*). The largest in-gamut chroma is tabulated over L* and hue once, from the exact gamut test
 * (CIE 15:2004 CIELAB, IEC 61966-2-1 primaries); colours near the table's boundary are checked exactly.
 */
import { LAB_KAPPA } from './cube-root.js';
import { D65_WHITE, XYZ_TO_SRGB } from './xyz.js';

const L_STEPS = 200; // one table row per half L* unit
/** Hue is indexed by the "diamond angle" (0-4 around the circle, no trigonometry), 48 steps a quadrant. */
const D_PER_QUADRANT = 48;
const D_STEPS = 4 * D_PER_QUADRANT;
/** Below this fraction of the tabulated maximum a colour is taken as inside without an exact check. */
const SURE = 0.95;
/** Target when reducing: a little inside the tabulated maximum. */
const MARGIN = 0.99;
/** Linear-light slack of the exact check: clipping this much moves L* by well under 0.1. */
const SLACK = 1e-3;

const [XN, , ZN] = D65_WHITE;
const M = XYZ_TO_SRGB;
// X/Xn, Y, Z/Zn straight to linear sRGB (white folded into the matrix).
const N00 = M[0]! * XN,
  N01 = M[1]!,
  N02 = M[2]! * ZN;
const N10 = M[3]! * XN,
  N11 = M[4]!,
  N12 = M[5]! * ZN;
const N20 = M[6]! * XN,
  N21 = M[7]!,
  N22 = M[8]! * ZN;
const F_EPS = 6 / 29;

/** Exact test: (L*, a*, b*) inside sRGB, each linear channel within [-slack, 1 + slack]. */
function inside(L: number, a: number, b: number, slack: number): boolean {
  const fy = (L + 16) / 116;
  const fx = fy + a / 500;
  const fz = fy - b / 200;
  const x = fx > F_EPS ? fx * fx * fx : (116 * fx - 16) / LAB_KAPPA;
  const y = L > 8 ? fy * fy * fy : L / LAB_KAPPA;
  const z = fz > F_EPS ? fz * fz * fz : (116 * fz - 16) / LAB_KAPPA;
  const lo = -slack;
  const hi = 1 + slack;
  const r = N00 * x + N01 * y + N02 * z;
  if (r < lo || r > hi) return false;
  const g = N10 * x + N11 * y + N12 * z;
  if (g < lo || g > hi) return false;
  const bl = N20 * x + N21 * y + N22 * z;
  return bl >= lo && bl <= hi;
}

/** Position of direction (a, b) around the circle as a diamond angle in [0, 4): 0 at +a*, 1 at +b*, 2 at -a*. */
function diamond(a: number, b: number): number {
  if (b >= 0) return a >= 0 ? b / (a + b) : 1 - a / (b - a);
  return a < 0 ? 2 - b / (-a - b) : 3 + a / (a - b);
}

let table: Float32Array | undefined;
let floorByL: Float32Array | undefined;

function buildTable(): void {
  const t = new Float32Array((L_STEPS + 1) * (D_STEPS + 1));
  for (let di = 0; di <= D_STEPS; di++) {
    const d = (di / D_PER_QUADRANT) % 4;
    const q = Math.floor(d);
    const s = d - q;
    const [ua, ub] = q === 0 ? [1 - s, s] : q === 1 ? [-s, 1 - s] : q === 2 ? [s - 1, -s] : [s, s - 1];
    const len = Math.hypot(ua, ub);
    for (let li = 0; li <= L_STEPS; li++) {
      const L = (li * 100) / L_STEPS;
      let lo = 0;
      let up = 200;
      for (let k = 0; k < 24; k++) {
        const mid = (lo + up) / 2;
        if (inside(L, (mid * ua) / len, (mid * ub) / len, 0)) lo = mid;
        else up = mid;
      }
      t[li * (D_STEPS + 1) + di] = lo;
    }
  }
  // Below this chroma (the smallest over all hues of two neighbouring L* rows) no lookup is needed.
  const f = new Float32Array(L_STEPS + 1);
  for (let li = 0; li < L_STEPS; li++) {
    let m = Infinity;
    for (let di = 0; di <= D_STEPS; di++) m = Math.min(m, t[li * (D_STEPS + 1) + di]!, t[(li + 1) * (D_STEPS + 1) + di]!);
    f[li] = m * SURE;
  }
  table = t;
  floorByL = f;
}

/** Tabulated maximum chroma at L* and diamond angle d, interpolated bilinearly. */
function lookup(L: number, d: number): number {
  const t = table!;
  const l = L <= 0 ? 0 : L >= 100 ? L_STEPS : (L * L_STEPS) / 100;
  const l0 = l >= L_STEPS ? L_STEPS - 1 : Math.floor(l);
  const tl = l - l0;
  const h = d * D_PER_QUADRANT;
  const h0 = Math.min(D_STEPS - 1, Math.floor(h));
  const th = h - h0;
  const r0 = l0 * (D_STEPS + 1) + h0;
  const r1 = r0 + D_STEPS + 1;
  const top = t[r0]! + (t[r0 + 1]! - t[r0]!) * th;
  const bottom = t[r1]! + (t[r1 + 1]! - t[r1]!) * th;
  return top + (bottom - top) * tl;
}

/**
 * The largest chroma C*ab kept at this L* and hue (radians), a little inside the sRGB gamut.
 * @example
 * maxChroma(50, 0); // about 76 (towards sRGB red-magenta at mid lightness)
 */
export function maxChroma(L: number, hue: number): number {
  if (!table) buildTable();
  return MARGIN * lookup(L, diamond(Math.cos(hue), Math.sin(hue)));
}

/**
 * Scales (a*, b*) towards grey, in place, wherever the colour at that L* would leave sRGB. L* and
 * hue are unchanged.
 * @example
 * const a = new Float32Array([90]), b = new Float32Array([0]);
 * limitChroma(new Float32Array([97]), a, b); // a[0] is now small: a bright red is not in sRGB
 */
export function limitChroma(L: Float32Array, a: Float32Array, b: Float32Array): void {
  if (!floorByL) buildTable();
  const floor = floorByL!;
  const n = L.length;
  for (let i = 0; i < n; i++) {
    const av = a[i]!;
    const bv = b[i]!;
    const c2 = av * av + bv * bv;
    if (c2 === 0) continue;
    const l = L[i]!;
    const li = l <= 0 ? 0 : l >= 100 ? L_STEPS - 1 : Math.floor((l * L_STEPS) / 100);
    const f = floor[li]!;
    if (c2 <= f * f) continue;
    const m = lookup(l, diamond(av, bv));
    if (c2 <= SURE * SURE * m * m) continue;
    const c = Math.sqrt(c2);
    let s = c > MARGIN * m ? (MARGIN * m) / c : 1;
    // Near the tabulated boundary: check exactly, and bisect to the boundary where the table promised too much.
    if (!inside(l, av * s, bv * s, SLACK)) {
      let lo = 0;
      let hi = s;
      for (let k = 0; k < 14; k++) {
        const mid = (lo + hi) / 2;
        if (inside(l, av * mid, bv * mid, SLACK)) lo = mid;
        else hi = mid;
      }
      s = lo;
    }
    if (s < 1) {
      a[i] = av * s;
      b[i] = bv * s;
    }
  }
}
