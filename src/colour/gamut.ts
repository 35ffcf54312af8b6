/** Whether a CIELAB colour can be shown in sRGB. */
import { labToLinearSrgb } from './lab.js';

// Slack for rounding: Lab values of in-gamut colours stored as float32 land up to ~1e-7 outside.
const ROUNDING_SLACK = 1e-6;
const rgb: [number, number, number] = [0, 0, 0];

/**
 * True when (L*, a*, b*) lies inside the sRGB gamut: each linear-light channel within
 * [-tolerance, 1 + tolerance] (plus a 1e-6 rounding slack). A negative tolerance asks for a
 * margin inside the gamut.
 * @example
 * inSrgbGamut(53.2408, 80.0925, 67.2032); // true (sRGB red)
 * inSrgbGamut(50, 100, 0); // false
 */
export function inSrgbGamut(L: number, a: number, b: number, tolerance = 0): boolean {
  labToLinearSrgb(L, a, b, rgb);
  const lo = -tolerance - ROUNDING_SLACK;
  const hi = 1 + tolerance + ROUNDING_SLACK;
  return rgb[0] >= lo && rgb[0] <= hi && rgb[1] >= lo && rgb[1] <= hi && rgb[2] >= lo && rgb[2] <= hi;
}
