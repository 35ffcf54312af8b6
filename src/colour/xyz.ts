/**
 * CIE XYZ for sRGB: the D65 white point and the linear-sRGB <-> XYZ matrices. XYZ is on the scale
 * where the white's Y is 1 (the ASTM E308 figures divided by 100).
 */

/** A writable triple: a plain array or a typed array of length 3 or more. */
export type Triple = { [index: number]: number };

/** D65 white, 2 degree observer, ASTM E308: X 95.047, Y 100, Z 108.883 (here divided by 100). */
export const D65_WHITE: readonly [number, number, number] = [0.95047, 1, 1.08883];

/** sRGB primaries and white chromaticities, IEC 61966-2-1 (ITU-R BT.709). */
const PRIMARIES_XY: readonly (readonly [number, number])[] = [
  [0.64, 0.33],
  [0.3, 0.6],
  [0.15, 0.06],
];

type Matrix3 = [number, number, number, number, number, number, number, number, number];

function invert3(m: readonly number[]): Matrix3 {
  const [a, b, c, d, e, f, g, h, i] = m as Matrix3;
  const A = e * i - f * h;
  const B = -(d * i - f * g);
  const C = d * h - e * g;
  const det = a * A + b * B + c * C;
  return [
    A / det,
    -(b * i - c * h) / det,
    (b * f - c * e) / det,
    B / det,
    (a * i - c * g) / det,
    -(a * f - c * d) / det,
    C / det,
    -(a * h - b * g) / det,
    (a * e - b * d) / det,
  ];
}

/**
 * Derives the matrix from the primaries and the ASTM white rather than using the rounded 4-decimal
 * IEC table, so that white maps to D65_WHITE exactly (to rounding) and the primaries land on the
 * published 7-decimal CIELAB values.
 */
function deriveRgbToXyz(): Matrix3 {
  const cols = PRIMARIES_XY.map(([x, y]) => [x / y, 1, (1 - x - y) / y]);
  const p = [cols[0][0], cols[1][0], cols[2][0], cols[0][1], cols[1][1], cols[2][1], cols[0][2], cols[1][2], cols[2][2]];
  const pi = invert3(p);
  const [wx, wy, wz] = D65_WHITE;
  const s = [0, 1, 2].map((r) => pi[3 * r] * wx + pi[3 * r + 1] * wy + pi[3 * r + 2] * wz);
  return p.map((v, k) => v * s[k % 3]) as Matrix3;
}

/** Linear sRGB to XYZ, row-major (about 0.4124564 0.3575761 0.1804375 / 0.2126729 ... ). */
export const SRGB_TO_XYZ: readonly number[] = Object.freeze(deriveRgbToXyz());
/** XYZ to linear sRGB, row-major: the inverse of SRGB_TO_XYZ. */
export const XYZ_TO_SRGB: readonly number[] = Object.freeze(invert3(SRGB_TO_XYZ));

/**
 * Linear sRGB (0-1) to XYZ (white Y = 1).
 * @example
 * linearSrgbToXyz(1, 1, 1); // [0.95047, 1, 1.08883]
 */
export function linearSrgbToXyz(r: number, g: number, b: number): [number, number, number];
export function linearSrgbToXyz<T extends Triple>(r: number, g: number, b: number, out: T): T;
export function linearSrgbToXyz(r: number, g: number, b: number, out: Triple = [0, 0, 0]): Triple {
  const m = SRGB_TO_XYZ;
  out[0] = m[0] * r + m[1] * g + m[2] * b;
  out[1] = m[3] * r + m[4] * g + m[5] * b;
  out[2] = m[6] * r + m[7] * g + m[8] * b;
  return out;
}

/**
 * XYZ (white Y = 1) to linear sRGB, not clipped (values outside 0-1 are outside the gamut).
 * @example
 * xyzToLinearSrgb(0.95047, 1, 1.08883); // [1, 1, 1] to rounding
 */
export function xyzToLinearSrgb(x: number, y: number, z: number): [number, number, number];
export function xyzToLinearSrgb<T extends Triple>(x: number, y: number, z: number, out: T): T;
export function xyzToLinearSrgb(x: number, y: number, z: number, out: Triple = [0, 0, 0]): Triple {
  const m = XYZ_TO_SRGB;
  out[0] = m[0] * x + m[1] * y + m[2] * z;
  out[1] = m[3] * x + m[4] * y + m[5] * z;
  out[2] = m[6] * x + m[7] * y + m[8] * z;
  return out;
}
