/**
 * Whether a colourised image has the right hues: three shares of pixels, on CIELAB chroma
 * C*ab = sqrt(a*² + b*²) and hue angle h_ab = atan2(b*, a*) (CIE 15:2004). Mean differences reward
 * muted colour; these say where colour is right, wrong or missing. The thresholds are our own
 * (kinhue's issue 17), declared here once and stated in the README.
 */
import type { LabPlanes } from './lab.js';

/** An original's pixel with C*ab at or above this is clearly coloured. */
export const CLEARLY_COLOURED_CHROMA = 15;
/** Below this C*ab a pixel is near-neutral: a result there is left grey. */
export const NEAR_NEUTRAL_CHROMA = 8;
/** A hue within this many degrees of the original's (included) is right. */
export const RIGHT_HUE_DEGREES = 30;
/** A hue more than this many degrees from the original's (excluded) is a false colour. */
export const FALSE_HUE_DEGREES = 60;

/** The three figures for one image, in percent. */
export interface HueAgreement {
  /**
   * Of the original's clearly coloured pixels (C*ab >= 15), the percentage whose result has
   * C*ab >= 8 and a hue within 30 degrees (inclusive) of the original's; null when there are none.
   */
  rightHue: number | null;
  /**
   * Of all pixels, the percentage where the result has C*ab >= 15 but the original is
   * near-neutral (C*ab < 8) or its hue differs by more than 60 degrees.
   */
  falseColour: number;
  /** Of the original's clearly coloured pixels, the percentage whose result has C*ab < 8; null when there are none. */
  leftGrey: number | null;
  /** The original's clearly coloured pixels: what rightHue and leftGrey are shares of. */
  colouredPixels: number;
  /** All pixels: what falseColour is a share of. */
  pixels: number;
}

/**
 * The difference of two hue angles in degrees, wrapped at 360: from 0 to 180.
 * @example
 * hueDifference(350, 10); // 20
 */
export function hueDifference(h1: number, h2: number): number {
  const d = Math.abs(h1 - h2) % 360;
  return d > 180 ? 360 - d : d;
}

const DEGREES = 180 / Math.PI;

/**
 * Percent of an image's pixels that are clearly coloured (C*ab >= 15): what right hue and left grey
 * are shares of.
 * @example
 * clearlyColouredShare(originalLab); // e.g. 62.5
 */
export function clearlyColouredShare(lab: LabPlanes): number {
  const n = lab.a.length;
  let coloured = 0;
  for (let i = 0; i < n; i++) if (Math.sqrt(lab.a[i] * lab.a[i] + lab.b[i] * lab.b[i]) >= CLEARLY_COLOURED_CHROMA) coloured++;
  return n ? (100 * coloured) / n : 0;
}

/**
 * Right hue, false colour and left grey of `result` against `original` (images of equal size).
 * @example
 * const { rightHue, falseColour, leftGrey } = hueAgreement(resultLab, originalLab);
 */
export function hueAgreement(result: LabPlanes, original: LabPlanes): HueAgreement {
  const n = original.L.length;
  if (result.a.length !== n || result.b.length !== n || original.a.length !== n || original.b.length !== n) {
    throw new RangeError(`hueAgreement: the two images differ in size (${n} and ${result.a.length} pixels)`);
  }
  if (n === 0) throw new RangeError('hueAgreement: the images are empty');
  let coloured = 0,
    right = 0,
    grey = 0,
    falseColour = 0;
  for (let i = 0; i < n; i++) {
    const oa = original.a[i],
      ob = original.b[i],
      ra = result.a[i],
      rb = result.b[i];
    const co = Math.sqrt(oa * oa + ob * ob);
    const cr = Math.sqrt(ra * ra + rb * rb);
    // Hue angles only where both are coloured enough to have one.
    const hueOff =
      co >= NEAR_NEUTRAL_CHROMA && cr >= NEAR_NEUTRAL_CHROMA
        ? hueDifference(Math.atan2(ob, oa) * DEGREES, Math.atan2(rb, ra) * DEGREES)
        : NaN;
    if (co >= CLEARLY_COLOURED_CHROMA) {
      coloured++;
      if (cr < NEAR_NEUTRAL_CHROMA) grey++;
      else if (hueOff <= RIGHT_HUE_DEGREES) right++;
    }
    if (cr >= CLEARLY_COLOURED_CHROMA && (co < NEAR_NEUTRAL_CHROMA || hueOff > FALSE_HUE_DEGREES)) falseColour++;
  }
  return {
    rightHue: coloured ? (100 * right) / coloured : null,
    falseColour: (100 * falseColour) / n,
    leftGrey: coloured ? (100 * grey) / coloured : null,
    colouredPixels: coloured,
    pixels: n,
  };
}

/**
 * The mean of per-photo figures that exist (null ones skipped), with how many it rests on;
 * null when none exists.
 * @example
 * meanOfPresent([40, null, 60]); // { mean: 50, photos: 2 }
 */
export function meanOfPresent(values: readonly (number | null | undefined)[]): { mean: number | null; photos: number } {
  let sum = 0,
    count = 0;
  for (const v of values) {
    if (v === null || v === undefined || Number.isNaN(v)) continue;
    sum += v;
    count++;
  }
  return { mean: count ? sum / count : null, photos: count };
}
