/**
 * A hint sets hue and chroma only: the scan's own L* stays. The hinted colour is read in CIELAB, its hue
 * angle and chroma kept, and it is placed at each pixel's L*; where that colour cannot exist in sRGB at
 * that lightness, chroma is reduced (hue and L* kept) until it can, and the change is reported.
 */
import { inSrgbGamut, labToSrgbColour, srgbColourToLab } from '../colour/index.js';
import { formatHex, type Rgb } from './css-colour.js';

/** A hinted colour in CIELAB polar form. */
export interface HintLch {
  L: number;
  chroma: number;
  /** Hue angle in radians. */
  hue: number;
}

/**
 * The CIELAB lightness, chroma and hue of an sRGB colour (0-255).
 *
 * @example
 *   hintLch([47, 93, 58]); // { L: 35.4, chroma: 25.1, hue: 2.5 }
 */
export function hintLch(rgb: Rgb): HintLch {
  const [L, a, b] = srgbColourToLab(rgb[0] / 255, rgb[1] / 255, rgb[2] / 255);
  return { L, chroma: Math.hypot(a, b), hue: Math.atan2(b, a) };
}

// Bisection steps: 2^-20 of the chroma, far below a visible difference.
const STEPS = 20;

/**
 * The largest chroma, at most `chroma`, that keeps (L*, hue) inside sRGB (inSrgbGamut).
 *
 * @example
 *   chromaAt(95, 60, 0.5); // well under 60: a strong red cannot be that light
 */
export function chromaAt(L: number, chroma: number, hue: number): number {
  const ca = Math.cos(hue),
    cb = Math.sin(hue);
  if (inSrgbGamut(L, chroma * ca, chroma * cb)) return chroma;
  let lo = 0,
    hi = chroma;
  for (let k = 0; k < STEPS; k++) {
    const mid = (lo + hi) / 2;
    if (inSrgbGamut(L, mid * ca, mid * cb)) lo = mid;
    else hi = mid;
  }
  return lo;
}

/**
 * The sRGB colour (hex) of a hue and chroma at a lightness, for messages.
 *
 * @example
 *   hexAt(70, 20, 2.5); // '#9db596' or thereabouts
 */
export function hexAt(L: number, chroma: number, hue: number): string {
  const [r, g, b] = labToSrgbColour(L, chroma * Math.cos(hue), chroma * Math.sin(hue));
  return formatHex([r * 255, g * 255, b * 255]);
}
