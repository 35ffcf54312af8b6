/**
 * Keeps new colour inside the sRGB gamut without touching lightness: where (L*, a*, b*) would fall
 * outside sRGB, chroma is reduced at constant L* and hue (rather than clipping each RGB channel, which
 * shifts L*). The largest in-gamut chroma is tabulated over L* and hue once, from the exact gamut test.
 */
import { labToLinearSrgb } from './lab.js';

const L_STEPS = 200; // one table row per half L* unit
const HUE_STEPS = 180; // 2 degrees
/** Table lookups interpolate bilinearly, times this margin; an exact check then catches the rare miss. */
const MARGIN = 0.99;
/** Linear-light slack of the exact check: clipping this much moves L* by well under 0.1. */
const SLACK = 1e-3;

let table: Float32Array | undefined;
const rgb: [number, number, number] = [0, 0, 0];

function inside(L: number, a: number, b: number): boolean {
  labToLinearSrgb(L, a, b, rgb);
  return rgb[0] >= -SLACK && rgb[0] <= 1 + SLACK && rgb[1] >= -SLACK && rgb[1] <= 1 + SLACK && rgb[2] >= -SLACK && rgb[2] <= 1 + SLACK;
}
let floorByL: Float32Array | undefined;

function buildTable(): void {
  const t = new Float32Array((L_STEPS + 1) * (HUE_STEPS + 1));
  const rgb: [number, number, number] = [0, 0, 0];
  const inside = (L: number, a: number, b: number): boolean => {
    labToLinearSrgb(L, a, b, rgb);
    return rgb[0] >= 0 && rgb[0] <= 1 && rgb[1] >= 0 && rgb[1] <= 1 && rgb[2] >= 0 && rgb[2] <= 1;
  };
  for (let li = 0; li <= L_STEPS; li++) {
    const L = (li * 100) / L_STEPS;
    for (let hi = 0; hi <= HUE_STEPS; hi++) {
      const h = (hi * 2 * Math.PI) / HUE_STEPS;
      const ca = Math.cos(h);
      const cb = Math.sin(h);
      let lo = 0;
      let up = 200;
      for (let k = 0; k < 24; k++) {
        const mid = (lo + up) / 2;
        if (inside(L, mid * ca, mid * cb)) lo = mid;
        else up = mid;
      }
      t[li * (HUE_STEPS + 1) + hi] = lo;
    }
  }
  // Below this chroma (the smallest over all hues of two neighbouring L* rows) no lookup is needed.
  const f = new Float32Array(L_STEPS + 1);
  for (let li = 0; li < L_STEPS; li++) {
    let m = Infinity;
    for (let hi = 0; hi <= HUE_STEPS; hi++) {
      m = Math.min(m, t[li * (HUE_STEPS + 1) + hi]!, t[(li + 1) * (HUE_STEPS + 1) + hi]!);
    }
    f[li] = m * MARGIN;
  }
  table = t;
  floorByL = f;
}

/**
 * The largest chroma C*ab kept at this L* and hue (radians), a little inside the sRGB gamut.
 * @example
 * maxChroma(50, 0); // about 76 (towards sRGB red-magenta at mid lightness)
 */
export function maxChroma(L: number, hue: number): number {
  if (!table) buildTable();
  const t = table!;
  const l = Math.min(L_STEPS, Math.max(0, (L * L_STEPS) / 100));
  const l0 = Math.min(L_STEPS - 1, Math.floor(l));
  const tl = l - l0;
  let h = (hue / (2 * Math.PI)) * HUE_STEPS;
  h = ((h % HUE_STEPS) + HUE_STEPS) % HUE_STEPS;
  const h0 = Math.floor(h);
  const th = h - h0;
  const r0 = l0 * (HUE_STEPS + 1);
  const r1 = (l0 + 1) * (HUE_STEPS + 1);
  const top = t[r0 + h0]! + (t[r0 + h0 + 1]! - t[r0 + h0]!) * th;
  const bottom = t[r1 + h0]! + (t[r1 + h0 + 1]! - t[r1 + h0]!) * th;
  return MARGIN * (top + (bottom - top) * tl);
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
    const c = Math.sqrt(c2);
    const m = maxChroma(l, Math.atan2(bv, av));
    let s = c > m ? m / c : 1;
    // The table is interpolated: check exactly, and where it promised too much, bisect to the boundary.
    if (!inside(l, av * s, bv * s)) {
      let lo = 0;
      let hi = s;
      for (let k = 0; k < 14; k++) {
        const mid = (lo + hi) / 2;
        if (inside(l, av * mid, bv * mid)) lo = mid;
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
